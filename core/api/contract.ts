/**
 * The one typed contract the CLI and the screens use. Requests are validated here, at the boundary, for every
 * transport (CLI, Electron IPC, loopback HTTP); responses are plain JSON-safe values.
 * The renderer may import this file's *types* only.
 */
import { z } from 'zod';
import { screenRequests } from './screens.ts';
import { fileRequests } from './files.ts';
import { reviewRequests } from './review.ts';
import { ablationRequests } from './ablation.ts';

const path = z.string().min(1).max(4096);
const layerName = z.string().min(1).max(1024);

export const requests = {
  /** Capturable tensors of a model (skein layers). */
  'model.layers': z.strictObject({ model: path }),
  /** What a probe-set folder holds, validated (no model needed). */
  'probes.inspect': z.strictObject({ probes: path }),
  /** Extract + score in one job (skein scan). */
  'scan.start': z.strictObject({
    model: path, probes: path, study: path,
    layers: z.array(layerName).max(10_000).optional(),
    batch: z.number().int().min(1).max(65_536).optional(),
    pool: z.enum(['max', 'mean', 'last']).optional(),
    chunkSize: z.number().int().min(1).max(1 << 20).optional(),
  }),
  'job.get': z.strictObject({ job: z.string().min(1).max(64) }),
  'job.cancel': z.strictObject({ job: z.string().min(1).max(64) }),
  /** Study metadata: fingerprints, layers, labels, whether scores exist. */
  'study.summary': z.strictObject({ study: path }),
  /** Ranked units (skein rank). */
  'study.rank': z.strictObject({ study: path, layer: layerName.optional(), top: z.number().int().min(1).optional() }),
  /** One unit in full (skein unit). */
  'unit.detail': z.strictObject({ study: path, layer: layerName, unit: z.number().int().min(0) }),
  'export.scores': z.strictObject({ study: path, out: path }),
  'export.activations': z.strictObject({ study: path, out: path, layer: layerName }),
  ...screenRequests,
  ...fileRequests,
  ...reviewRequests,
  ...ablationRequests,
} as const;

export type Method = keyof typeof requests;
export type Request<M extends Method> = z.infer<(typeof requests)[M]>;

export type { ErrorInfo } from '../errors.ts';
export type { ModelInfo, CapturableTensor } from '../model/types.ts';
export type { RankRow, UnitDetail, LabelStatRow, TopExample } from '../store/queries.ts';
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
