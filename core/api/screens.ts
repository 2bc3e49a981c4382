/**
 * Requests only the screens make (unit table, concept view, layer overview, example images, file browser).
 * Composed into the one API by createApi; validated like every other request.
 */
import { z } from 'zod';
import type { ApiContext } from './index.ts';

export const screenRequests = {} satisfies Record<string, z.ZodType>;

export function createScreenApi(_ctx: ApiContext) {
  return {};
}
