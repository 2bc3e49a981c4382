/** Requests of the removal cost (core/intervene): one unit now, a layer as a job, and the stored results. */
import { z } from 'zod';
import { filePath, layerName } from './fields.ts';

const setup = {
  study: filePath,
  /** The model file; default: the one the study was scanned with. */
  model: filePath.optional(),
  layer: layerName,
  mode: z.enum(['zero', 'mean', 'value']).optional(),
  value: z.number().finite().optional(),
  sample: z.number().int().min(2).max(10_000_000).optional(),
  seed: z.number().int().min(0).max(2 ** 32 - 1).optional(),
};

export const ablationRequests = {
  /** Ablate one unit now, with full bootstrap intervals (skein ablate --unit). */
  'ablate.unit': z.strictObject({ ...setup, unit: z.number().int().min(0) }),
  /** The newest stored cost of one unit, or null (the unit page opens with it). */
  'ablate.cached': z.strictObject({ study: filePath, layer: layerName, unit: z.number().int().min(0) }),
  /** Ablate every unit of a layer, one at a time, as a job (skein ablate --all). */
  'ablate.start': z.strictObject(setup),
  'ablate.job': z.strictObject({ job: z.string().min(1).max(64) }),
  'ablate.cancel': z.strictObject({ job: z.string().min(1).max(64) }),
  /** The stored bulk results of a layer (newest run, or the one named), units ranked by unrelated concepts hurt. */
  'ablate.layer': z.strictObject({ study: filePath, layer: layerName, run: z.number().int().min(1).optional() }),
  /** Per layer, the concepts hurt of every unit with a stored cost (the roster's sort). */
  'ablate.roster': z.strictObject({ study: filePath }),
} satisfies Record<string, z.ZodType>;
