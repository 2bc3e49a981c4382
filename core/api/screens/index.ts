/**
 * Handlers of the requests only the screens make (schemas: core/api/requests/screens.ts). Each opens the study, builds
 * its read-model (read-models.ts) and closes it. Composed into the one API by createApi.
 */
import type { z } from 'zod';
import type { ApiContext } from '../context.ts';
import type { screenRequests } from '../requests/screens.ts';
import { openStudyDb, withStudyDb } from '../../store/study.ts';
import { unitTable, unitDistributions, similarUnits, conceptReach, layerStrata, exampleImage, probeLabels } from './read-models.ts';
import { unitEvidence } from './evidence.ts';

type Req<K extends keyof typeof screenRequests> = z.infer<(typeof screenRequests)[K]>;

export function createScreenApi(ctx: ApiContext) {
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);
  return {
    'units.table': async (r: Req<'units.table'>) => withStudy(r.study, (db) => unitTable(db, r.study)),
    'unit.distributions': async (r: Req<'unit.distributions'>) => withStudy(r.study, (db) => unitDistributions(db, r.layer, r.unit, { bins: r.bins, labels: r.labels, file: r.study })),
    'unit.similar': async (r: Req<'unit.similar'>) => withStudy(r.study, (db) => similarUnits(db, r.layer, r.unit, { top: r.top, file: r.study })),
    'concept.units': async (r: Req<'concept.units'>) => withStudy(r.study, (db) => conceptReach(db, r.label, { top: r.top, file: r.study })),
    'layers.strata': async (r: Req<'layers.strata'>) => withStudy(r.study, (db) => layerStrata(db, r.study)),
    'example.image': async (r: Req<'example.image'>) => withStudy(r.study, (db) => exampleImage(db, r.probe, r.study, ctx.allowedRoots)),
    'probes.labels': async (r: Req<'probes.labels'>) => withStudy(r.study, (db) => probeLabels(db, r.probes)),
    'unit.evidence': async ({ study, ...r }: Req<'unit.evidence'>) => withStudy(study, (db) => unitEvidence(db, r, study)),
  };
}

export type {
  UnitTable, UnitDistributions, SimilarUnits, ConceptReach, ConceptReachRow, LayerStrata, LayerStrataRow, ScoreThresholds, UnitKind,
  RankRow, UnitDetail, LabelStatRow, TopExample,
} from './read-models.ts';
export type { UnitEvidence, DriverEvidence, EvidenceExample, RankingReason } from './evidence.ts';
