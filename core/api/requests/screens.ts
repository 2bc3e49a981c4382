/** Requests only the screens make (unit table, unit profile panels, label reach, layer strata, example images). */
import { z } from 'zod';
import { filePath, labelName, layerName, unitIndex } from './fields.ts';

export const screenRequests = {
  /** Every scored unit as column arrays (compact for 10^5 rows), ordered by rank. */
  'units.table': z.strictObject({ study: filePath }),
  /** Histograms of one unit's activations, overall and per label (default: drivers, then top AUROC). */
  'unit.distributions': z.strictObject({
    study: filePath, layer: layerName, unit: unitIndex,
    bins: z.number().int().min(2).max(200).optional(),
    labels: z.array(labelName).max(24).optional(),
  }),
  /** Units of the same layer that correlate most with this one, on a bounded probe sample. */
  'unit.similar': z.strictObject({
    study: filePath, layer: layerName, unit: unitIndex,
    top: z.number().int().min(1).max(100).optional(),
  }),
  /** For one label: the units it drives, how exclusively, and its AUROC spread over all units. */
  'concept.units': z.strictObject({ study: filePath, label: labelName, top: z.number().int().min(1).max(5000).optional() }),
  /** Per layer (the Strata screen): concept-count histogram and how many units are of each kind. */
  'layers.strata': z.strictObject({ study: filePath }),
  /** One probe's example image as a data: URL, read from inside the study's probe-set folder only. */
  'example.image': z.strictObject({ study: filePath, probe: z.number().int().min(0) }),
  /** Label names of up to 512 probes (captions of top examples). */
  'probes.labels': z.strictObject({ study: filePath, probes: z.array(z.number().int().min(0)).max(512) }),
  /**
   * The evidence for one unit's drivers. `drivers` (optional) replaces the stored driver list with the caller's own,
   * each a list of 1–3 labels that must all be present (a compound); default: the unit's stored drivers.
   */
  'unit.evidence': z.strictObject({
    study: filePath, layer: layerName, unit: z.number().int().min(0),
    drivers: z.array(z.array(labelName).min(1).max(3)).max(12).optional(),
    examples: z.number().int().min(1).max(24).optional(),
  }),
} satisfies Record<string, z.ZodType>;
