/**
 * Requests only the screens make (unit table, unit profile panels, label reach, layer overview, example images).
 * Composed into the one API by createApi; validated like every other request.
 */
import { z } from 'zod';
import type { ApiContext } from './index.ts';
import { openStudyDb, withStudyDb } from '../store/study.ts';
import { unitTable, unitDistributions, similarUnits, conceptReach, layerOverview, exampleImage, probeLabels } from '../store/views.ts';
import { evidenceRequests, unitEvidence } from './screens/evidence.ts';

const path = z.string().min(1).max(4096);
const layerName = z.string().min(1).max(1024);
const labelName = z.string().min(1).max(1024);

export const screenRequests = {
  /** Every scored unit as column arrays (compact for 10^5 rows), ordered by rank. */
  'units.table': z.strictObject({ study: path }),
  /** Histograms of one unit's activations, overall and per label (default: drivers, then top AUROC). */
  'unit.distributions': z.strictObject({
    study: path, layer: layerName, unit: z.number().int().min(0),
    bins: z.number().int().min(2).max(200).optional(),
    labels: z.array(labelName).max(24).optional(),
  }),
  /** Units of the same layer that correlate most with this one, on a bounded probe sample. */
  'unit.similar': z.strictObject({
    study: path, layer: layerName, unit: z.number().int().min(0),
    top: z.number().int().min(1).max(100).optional(),
  }),
  /** For one label: the units it drives, how exclusively, and its AUROC spread over all units. */
  'concept.units': z.strictObject({ study: path, label: labelName, top: z.number().int().min(1).max(5000).optional() }),
  /** Per layer: concept-count histogram and the shares of polysemantic, dead and dense units. */
  'layers.overview': z.strictObject({ study: path }),
  /** One probe's example image as a data: URL, read from inside the study's probe-set folder only. */
  'example.image': z.strictObject({ study: path, probe: z.number().int().min(0) }),
  /** Label names of up to 512 probes (captions of top examples). */
  'probes.labels': z.strictObject({ study: path, probes: z.array(z.number().int().min(0)).max(512) }),
  ...evidenceRequests,
} satisfies Record<string, z.ZodType>;

type Req<K extends keyof typeof screenRequests> = z.infer<(typeof screenRequests)[K]>;

export function createScreenApi(ctx: ApiContext) {
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);
  return {
    'units.table': async (r: Req<'units.table'>) => withStudy(r.study, (db) => unitTable(db, r.study)),
    'unit.distributions': async (r: Req<'unit.distributions'>) => withStudy(r.study, (db) => unitDistributions(db, r.layer, r.unit, { bins: r.bins, labels: r.labels, file: r.study })),
    'unit.similar': async (r: Req<'unit.similar'>) => withStudy(r.study, (db) => similarUnits(db, r.layer, r.unit, { top: r.top, file: r.study })),
    'concept.units': async (r: Req<'concept.units'>) => withStudy(r.study, (db) => conceptReach(db, r.label, { top: r.top, file: r.study })),
    'layers.overview': async (r: Req<'layers.overview'>) => withStudy(r.study, (db) => layerOverview(db, r.study)),
    'example.image': async (r: Req<'example.image'>) => withStudy(r.study, (db) => exampleImage(db, r.probe, r.study)),
    'probes.labels': async (r: Req<'probes.labels'>) => withStudy(r.study, (db) => probeLabels(db, r.probes)),
    'unit.evidence': async ({ study, ...r }: Req<'unit.evidence'>) => withStudy(study, (db) => unitEvidence(db, r, study)),
  };
}

export type { UnitTable, UnitDistributions, SimilarUnits, ConceptReach, ConceptReachRow, LayerOverview, LayerOverviewRow, ScoreThresholds } from '../store/views.ts';
export type { UnitEvidence, DriverEvidence, EvidenceExample, RankingReason } from './screens/evidence.ts';
