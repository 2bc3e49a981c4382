/** Requests of the superposition lens (core/geometry): the cached result, the job, a unit's loadings, exports. */
import { z } from 'zod';
import { filePath, layerName } from './fields.ts';

export const lensRequests = {
  /** The layer's lens when it is cached and still valid, else `{ state: 'missing' }` (nothing is computed). */
  'lens.get': z.strictObject({ study: filePath, layer: layerName }),
  /** Compute (or reuse) a layer's lens as a job: poll lens.job, stop with lens.cancel. */
  'lens.start': z.strictObject({ study: filePath, layer: layerName }),
  'lens.job': z.strictObject({ job: z.string().min(1).max(64) }),
  'lens.cancel': z.strictObject({ job: z.string().min(1).max(64) }),
  /** The concept directions one unit's axis sits between (from the cached lens). */
  'lens.unit': z.strictObject({ study: filePath, layer: layerName, unit: z.number().int().min(0) }),
  /** Every figure of a cached lens as CSV + JSON, and the directions as .npy, into the folder `out`. */
  'lens.export': z.strictObject({ study: filePath, layer: layerName, out: filePath }),
} satisfies Record<string, z.ZodType>;

