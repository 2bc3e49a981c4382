/**
 * The one typed contract the CLI and the screens use. Requests are validated here, at the boundary, for every
 * transport (CLI, Electron IPC, loopback HTTP); responses are plain JSON-safe values.
 * The renderer may import this file's *types* only. A leaf: at run time it loads zod and the request schemas (which
 * load only zod and core/review/vocabulary), so any module may import it without forming a cycle.
 */
import { z } from 'zod';
import { studyRequests } from './requests/study.ts';
import { screenRequests } from './requests/screens.ts';
import { fileRequests } from './requests/files.ts';
import { reviewRequests } from './requests/review.ts';
import { ablationRequests } from './requests/ablation.ts';
import { lensRequests } from './requests/lens.ts';

/** Every request the API answers, by method name. */
export const requests = {
  ...studyRequests,
  ...screenRequests,
  ...fileRequests,
  ...reviewRequests,
  ...ablationRequests,
  ...lensRequests,
} as const;

export type Method = keyof typeof requests;
export type Request<M extends Method> = z.infer<(typeof requests)[M]>;

export type { ErrorInfo } from '../errors.ts';
export type { ModelInfo, CapturableTensor } from '../model/types.ts';
export type {
  RankRow, UnitDetail, LabelStatRow, TopExample, UnitTable, UnitDistributions, SimilarUnits, ConceptReach, ConceptReachRow,
  LayerStrata, LayerStrataRow, ScoreThresholds, UnitKind,
} from './screens/read-models.ts';
export type { ProgressReport } from '../extract/progress.ts';

export interface ProbeSummary {
  dir: string; name: string; fingerprint: string; count: number;
  inputs: { name: string; dtype: string; rowShape: number[] }[];
  labels: { name: string; count: number }[];
  concepts: number; examples: number; warnings: string[];
}

export interface StudySummary {
  file: string;
  model: { path: string; fingerprint: string };
  probes: { dir: string; name: string; fingerprint: string; count: number };
  layers: { name: string; op: string; kind: string; units: number; pool: string; dims: number[] }[];
  labels: string[];
  scored: boolean;
  createdAt: string;
  updatedAt: string;
}

export interface JobState {
  job: string;
  state: 'running' | 'done' | 'failed' | 'cancelled';
  progress: import('../extract/progress.ts').ProgressReport | null;
  notes: string[];
  error: import('../errors.ts').ErrorInfo | null;
  result: ScanResult | null;
}

export interface ScanResult {
  study: string;
  probes: number;
  layers: { name: string; units: number; kind: string }[];
  chunksComputed: number;
  chunksReused: number;
  resumed: boolean;
  scoresReused: boolean;
  extractSeconds: number;
  scoreSeconds: number;
}

export interface ExportResult { file: string; rows: number; columns: number }
export type { UnitAblationView, LayerAblationView, LayerAblationRow, AblateJobState, AblationRunInfo, UnitCost, LabelCost, Comparison } from './ablation.ts';
export type { LensView, LensJobState, UnitLoadings, LensExport, LensResult, LensConcept } from './lens.ts';
