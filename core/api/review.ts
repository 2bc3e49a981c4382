/**
 * Review requests: tags, notes, status, history, undo, bundles, merge, report. Composed into the one API by
 * createApi; validated like every other request.
 */
import { z } from 'zod';
import type { ApiContext } from './index.ts';

export const reviewRequests = {} satisfies Record<string, z.ZodType>;

export function createReviewApi(_ctx: ApiContext) {
  return {};
}
