/**
 * The server-side file browser of browser mode (choose a model, probe set or study by path, confined to
 * ApiContext.allowedRoots). Composed into the one API by createApi.
 */
import { z } from 'zod';
import type { ApiContext } from './index.ts';

export const fileRequests = {} satisfies Record<string, z.ZodType>;

export function createFileApi(_ctx: ApiContext) {
  return {};
}
