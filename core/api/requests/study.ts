/** Requests of the pipeline: models, probe sets, scans and their jobs, a study's rank and units, exports. */
import { z } from 'zod';
import { filePath, layerName, unitIndex } from './fields.ts';

export const studyRequests = {
  /** Capturable tensors of a model (skein layers). */
  'model.layers': z.strictObject({ model: filePath }),
  /** What a probe-set folder holds, validated (no model needed). */
  'probes.inspect': z.strictObject({ probes: filePath }),
  /** Extract + score in one job (skein scan). */
  'scan.start': z.strictObject({
    model: filePath, probes: filePath, study: filePath,
    layers: z.array(layerName).max(10_000).optional(),
    batch: z.number().int().min(1).max(65_536).optional(),
    pool: z.enum(['max', 'mean', 'last']).optional(),
    chunkSize: z.number().int().min(1).max(1 << 20).optional(),
  }),
  'job.get': z.strictObject({ job: z.string().min(1).max(64) }),
  'job.cancel': z.strictObject({ job: z.string().min(1).max(64) }),
  /** Study metadata: fingerprints, layers, labels, whether scores exist. */
  'study.summary': z.strictObject({ study: filePath }),
  /** Ranked units (skein rank). */
  'study.rank': z.strictObject({ study: filePath, layer: layerName.optional(), top: z.number().int().min(1).optional() }),
  /** One unit in full (skein unit). */
  'unit.detail': z.strictObject({ study: filePath, layer: layerName, unit: unitIndex }),
  'export.scores': z.strictObject({ study: filePath, out: filePath }),
  'export.activations': z.strictObject({ study: filePath, out: filePath, layer: layerName }),
} satisfies Record<string, z.ZodType>;
