/**
 * The superposition lens of one captured layer: concept directions, how decodable each is, how they interfere,
 * how many dimensions each gets, how many units carry it, and the layer's effective dimensionality.
 *
 * Out of core: one pass over the cached activations, chunk by chunk, accumulates per-unit sums, per-concept sums
 * and the cross-product matrix (units × units); the probes are fitted on the probes held in memory, all of them
 * when N × units float32 fits the sample budget, else a seeded uniform sample that does (stated in the result).
 */
import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { mulberry32, shuffle } from '../random.ts';
import { readBinding, findLayer, type LayerRow, type StudyBinding as RunRow } from '../store/binding.ts';
import { doneChunks, readLayerChunk } from '../store/activations.ts';
import { readLabelMatrix } from '../score/job.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { createKernels, type Kernels } from './kernels.ts';
import { crossValidatedProbes, defaultProbeOptions, foldsOf, type ProbeOptions } from './probe.ts';
import { clusterOrder, cosineMatrix, featureDimensionality, participationRatio, projectDirections, rowNorm, totalInterference } from './stats.ts';

/** Bump when a formula or the result's shape changes: cached results under another version are recomputed. */
export const LENS_VERSION = 3;

export const CAUTION = 'These figures are hypotheses about the model on this probe set, not proof: a concept the probes miss may still be there nonlinearly, and one they find may be a correlate of the label. Check the units before pruning or trusting them.';

export interface LensOptions extends ProbeOptions {
  seed: number;
  /** Activations held in memory for the probes, in bytes (N × units × 4 above this: a seeded sample of probes). */
  sampleBytes: number;
  /** A concept is carried linearly at held-out AUROC ≥ this (the driver threshold of core/score). */
  carriedAuroc: number;
  /** ... and counted as decodable at AUROC ≥ this. */
  decodableAuroc: number;
  /** Smallest k reaching this fraction of the full probe's AUROC. */
  localisationFraction: number;
  /** onnxruntime threads (unset: its default, the machine's cores). */
  threads?: number;
}

export const defaultLensOptions: LensOptions = {
  ...defaultProbeOptions, seed: 12, sampleBytes: 512 * 2 ** 20, carriedAuroc: 0.75, decodableAuroc: 0.9, localisationFraction: 0.95,
};

/** A binary concept over the probes beyond the plain labels (a compound driver such as `a & b`). */
export interface ExtraConcept { name: string; kind: 'compound'; positive: Uint8Array }

export interface LensConcept {
  name: string;
  kind: 'label' | 'compound';
  positives: number;
  /** ‖class-mean difference‖ in activation units. */
  norm: number;
  /** Pooled out-of-fold AUROC of the full probe; null when the concept has too few probes on either side. */
  auroc: number | null;
  carried: boolean;
  decodable: boolean;
  dimensionality: number;
  interference: number;
  /** Sparse-probing AUROC from the best k units, k = 1, 2, 4, …, width (carried concepts only). */
  curve: { k: number; auroc: number | null }[];
  k95: number | null;
  locality: 'local' | 'few' | 'spread' | 'not carried';
  /** Units the direction leans on most: the unit-axis components of the unit direction ŵ. */
  topUnits: { unit: number; loading: number }[];
}

export interface LensResult {
  version: number;
  layer: string;
  units: number;
  probes: number;
  /** Probes the probes were fitted on (all, or a seeded sample; means and covariance always use all). */
  probesFitted: number;
  folds: number;
  seed: number;
  l2: number;
  effectiveDimensions: number;
  decodableCount: number;
  conceptsPerDimension: number;
  dimensionalitySum: number;
  concepts: LensConcept[];
  /** Indices (into concepts) of the carried concepts, in clustered order, and their cosine matrix in that order. */
  carriedOrder: number[];
  cosine: number[][];
  /** 2-D placement of the carried directions: coordinates in `carriedOrder`, and the share of ‖W‖² it keeps. */
  projection: { x: number[]; y: number[]; kept: number; method: string };
  mostInterfering: { a: string; b: string; cosine: number } | null;
  summary: string;
  caution: string;
  seconds: number;
  computedAt: string;
}

export interface LensOutput { result: LensResult; directions: Float32Array }

export interface LensHooks {
  onProgress?: (p: ProgressReport) => void;
  signal?: AbortSignal;
}

/** Hash of everything a lens result depends on: it is reused while this matches. */
export function lensKey(run: RunRow, layer: LayerRow, opts: LensOptions, extras: ExtraConcept[]): string {
  const h = crypto.createHash('sha256');
  const { threads: _threads, ...figures } = opts;
  h.update(JSON.stringify({ v: LENS_VERSION, m: run.modelFp, p: run.probesFp, l: [layer.name, layer.units, layer.pool, layer.kind], o: figures }));
  for (const e of extras) h.update(e.name).update(e.positive);
  return h.digest('hex');
}

const yieldNow = () => new Promise<void>((resolve) => setImmediate(resolve));

function pairText(a: string, b: string, c: number): string {
  return `${a} and ${b} (cos ${c >= 0 ? '' : '−'}${Math.abs(c).toFixed(2)})`;
}

/** The layer summary in words (the sentence form). */
export function summarise(r: Pick<LensResult, 'units' | 'effectiveDimensions' | 'decodableCount' | 'conceptsPerDimension' | 'concepts' | 'mostInterfering' | 'dimensionalitySum'>): string {
  const plain = r.concepts.filter((c) => c.kind === 'label');
  const local = plain.filter((c) => c.locality === 'local').length;
  const spread = plain.filter((c) => c.locality === 'spread').length;
  const carried = plain.filter((c) => c.carried).length;
  const parts = [
    `${r.units} unit${r.units === 1 ? '' : 's'}, about ${r.effectiveDimensions.toFixed(1)} effective dimensions, ${r.decodableCount} decodable concept${r.decodableCount === 1 ? '' : 's'}: ${r.conceptsPerDimension.toFixed(1)} per dimension.`,
    `${local} ${local === 1 ? 'is' : 'are'} local to one unit, ${spread} spread over 4 or more units (of ${carried} carried linearly).`,
    `Feature dimensionality sums to ${r.dimensionalitySum.toFixed(1)} over ${r.units} unit${r.units === 1 ? '' : 's'}.`,
  ];
  const compounds = r.concepts.filter((c) => c.kind === 'compound');
  if (compounds.length) parts.push(`Counted over labels; ${compounds.filter((c) => c.decodable).length} of ${compounds.length} compound drivers are decodable too.`);
  if (r.mostInterfering) parts.push(`Most interfering pair: ${pairText(r.mostInterfering.a, r.mostInterfering.b, r.mostInterfering.cosine)}.`);
  return parts.join(' ');
}

/** Powers of two below the width, then the width: the sparse-probing sizes. */
export function probeSizes(width: number): number[] {
  const ks: number[] = [];
  for (let k = 1; k < width; k *= 2) ks.push(k);
  ks.push(width);
  return ks;
}

/**
 * Pass 1 over the layer's chunks: per-unit sums, per-concept sums, shifted cross products (→ covariance →
 * participation ratio), and the fitted probes' rows kept probe-major. The units² covariance lives only in here.
 */
async function readLayerOnce(
  db: Database.Database, run: RunRow, layer: LayerRow, rowOf: Int32Array, fitCount: number, positive: Uint8Array[],
  kernels: Kernels, progress: Progress, check: () => void,
) {
  const N = run.probeCount;
  const m = layer.units;
  const T = positive.length;
  const chunks = Math.ceil(N / run.chunkSize);
  const x = new Float32Array(fitCount * m);
  const sum = new Float64Array(m);
  const conceptSum = new Float64Array(T * m);
  const cross = new Float64Array(m * m);
  let shift: Float64Array | null = null;
  const block = new Float32Array(run.chunkSize * m);
  for (let c = 0; c < chunks; c++) {
    check();
    const cols = readLayerChunk(db, layer.id, c);
    if (cols.length !== m) throw new SkeinError({ code: 'study', where: `layer ${layer.name}`, message: 'The scan of this layer is incomplete. Run the scan again to finish it.' });
    const len = cols[0].length;
    const base = c * run.chunkSize;
    if (!shift) {
      // Shifting by the first chunk's means keeps Σ(x−s)(x−s)ᵀ − n(μ−s)(μ−s)ᵀ well conditioned (Chan, Golub & LeVeque 1983).
      shift = new Float64Array(m);
      for (let u = 0; u < m; u++) { let s = 0; for (let p = 0; p < len; p++) s += cols[u][p]; shift[u] = s / len; }
    }
    for (let u = 0; u < m; u++) {
      const col = cols[u];
      let s = 0;
      for (let p = 0; p < len; p++) {
        const v = col[p];
        s += v;
        block[p * m + u] = v - shift[u];
        const r = rowOf[base + p];
        if (r >= 0) x[r * m + u] = v;
      }
      sum[u] += s;
    }
    for (let t = 0; t < T; t++) {
      const pos = positive[t];
      const acc = conceptSum.subarray(t * m, (t + 1) * m);
      for (let p = 0; p < len; p++) {
        if (!pos[base + p]) continue;
        for (let u = 0; u < m; u++) acc[u] += cols[u][p];
      }
    }
    const xtx = await kernels.cross(block, len, m);
    for (let k = 0; k < m * m; k++) cross[k] += xtx[k];
    progress.advance(1);
    await yieldNow();
  }
  const mean = sum.map((s) => s / N);
  // Covariance C = (Σ(x−s)(x−s)ᵀ − N(μ−s)(μ−s)ᵀ) / (N − 1) (sample covariance, shifted data).
  const cov = cross;
  for (let a = 0; a < m; a++) {
    const da = mean[a] - shift![a];
    for (let b = 0; b < m; b++) cov[a * m + b] = (cov[a * m + b] - N * da * (mean[b] - shift![b])) / Math.max(1, N - 1);
  }
  const effectiveDimensions = participationRatio(cov, m);
  const std = Float64Array.from({ length: m }, (_, u) => Math.sqrt(Math.max(0, cov[u * m + u])));
  return { x, sum, conceptSum, mean, std, effectiveDimensions };
}

/**
 * Computes the lens of one layer from the study's cached activations and labels. Cancel via `hooks.signal`;
 * progress counts chunks read, then probe batches, then sparse probes.
 */
export async function computeLens(db: Database.Database, layerName: string, options: Partial<LensOptions> = {}, hooks: LensHooks = {}, extras: ExtraConcept[] = []): Promise<LensOutput> {
  const started = Date.now();
  const opts: LensOptions = { ...defaultLensOptions, ...options };
  const run = readBinding(db);
  if (!run) throw new SkeinError({ code: 'study', message: 'This study has no scan yet. Run skein scan first.' });
  const layer = findLayer(db, layerName);
  const chunks = Math.ceil(run.probeCount / run.chunkSize);
  if (doneChunks(db, layer.id).size !== chunks) {
    throw new SkeinError({ code: 'study', where: `layer ${layer.name}`, message: `The scan of layer ${layer.name} is incomplete. Run the scan again to finish it first.` });
  }
  const labels = readLabelMatrix(db, run);
  const N = run.probeCount;
  const m = layer.units;
  const names = [...labels.labels, ...extras.map((e) => e.name)];
  const T = names.length;
  const positive: Uint8Array[] = labels.labels.map(() => new Uint8Array(N));
  for (let p = 0; p < N; p++) for (let k = labels.labelOffsets[p]; k < labels.labelOffsets[p + 1]; k++) positive[labels.labelIds[k]][p] = 1;
  for (const e of extras) {
    if (e.positive.length !== N) throw new SkeinError({ code: 'request', where: `concept ${e.name}`, message: `Concept "${e.name}" covers ${e.positive.length} probes, the study has ${N}.` });
    positive.push(e.positive);
  }
  const check = () => {
    if (hooks.signal?.aborted) throw new SkeinError({ code: 'cancelled', message: 'The lens was cancelled; nothing was saved. Run it again to compute it.' });
  };

  // Which probes the probes are fitted on.
  const fitCount = Math.min(N, Math.max(2 * opts.folds, Math.floor(opts.sampleBytes / (4 * m))));
  const rowOf = new Int32Array(N).fill(-1);
  if (fitCount === N) for (let p = 0; p < N; p++) rowOf[p] = p;
  else {
    const order = Int32Array.from({ length: N }, (_, i) => i);
    shuffle(order, mulberry32(opts.seed));
    const chosen = order.subarray(0, fitCount).sort();
    chosen.forEach((p, r) => { rowOf[p] = r; });
  }

  // Steps: each chunk read, the full probes, then each concept's sparse probes.
  const progress = new Progress('geometry', chunks + 1 + T, hooks.onProgress);
  const kernels: Kernels = await createKernels(opts.threads);
  try {
    const { x, sum, conceptSum, mean, std, effectiveDimensions } = await readLayerOnce(db, run, layer, rowOf, fitCount, positive, kernels, progress, check);

    // Concept directions: class-mean differences μ(with) − μ(without) (the difference-of-means probe; Alain & Bengio 2016 use linear probes, the mean difference is common practice, no source).
    const counts = positive.map((pos) => pos.reduce((s, v) => s + v, 0));
    const dirs = new Float64Array(T * m);
    for (let t = 0; t < T; t++) {
      const n1 = counts[t];
      if (n1 === 0 || n1 === N) continue;
      for (let u = 0; u < m; u++) dirs[t * m + u] = conceptSum[t * m + u] / n1 - (sum[u] - conceptSum[t * m + u]) / (N - n1);
    }

    // Probes on standardised units (z-scores with the all-probe mean and deviation; a constant unit contributes 0).
    for (let r = 0; r < fitCount; r++) for (let u = 0; u < m; u++) x[r * m + u] = std[u] > 0 ? (x[r * m + u] - mean[u]) / std[u] : 0;
    const fitTargets = positive.map((pos) => {
      const out = new Uint8Array(fitCount);
      for (let p = 0; p < N; p++) if (rowOf[p] >= 0) out[rowOf[p]] = pos[p];
      return out;
    });
    const fold = foldsOf(fitCount, opts.folds, opts.seed);
    const step = async () => { check(); await yieldNow(); };
    const full = await crossValidatedProbes(kernels, x, fitCount, m, fitTargets, fold, opts, step);
    progress.advance(1);

    const auroc = Array.from(full.auroc, (a) => (Number.isNaN(a) ? null : a));
    const carried = auroc.map((a) => a !== null && a >= opts.carriedAuroc);
    const sizes = probeSizes(m);
    const curves: { k: number; auroc: number | null }[][] = names.map(() => []);
    const sub = new Float32Array(fitCount * Math.max(1, sizes.length > 1 ? sizes[sizes.length - 2] : 1));
    for (let t = 0; t < T; t++) {
      if (!carried[t]) { progress.advance(1); continue; }
      // Units ranked by |standardised mean difference| (sparse probing's mean-difference ranking; Gurnee et al. 2023, from memory).
      const rank = Int32Array.from({ length: m }, (_, u) => u).sort((a, b) => Math.abs(dirs[t * m + b]) / (std[b] || Infinity) - Math.abs(dirs[t * m + a]) / (std[a] || Infinity));
      for (const k of sizes) {
        if (k === m) { curves[t].push({ k, auroc: auroc[t] }); continue; }
        for (let r = 0; r < fitCount; r++) for (let j = 0; j < k; j++) sub[r * k + j] = x[r * m + rank[j]];
        const res = await crossValidatedProbes(kernels, sub, fitCount, k, [fitTargets[t]], fold, opts, step);
        curves[t].push({ k, auroc: Number.isNaN(res.auroc[0]) ? null : res.auroc[0] });
      }
      progress.advance(1);
    }

    // D and interference over the labels (the features of the formula); a compound, being made of labels, is
    // measured against the labels and itself only, so it does not lower the labels' own figures.
    const L = labels.labels.length;
    const dimensionality = new Float64Array(T);
    const interference = new Float64Array(T);
    dimensionality.set(featureDimensionality(dirs.subarray(0, L * m), L, m));
    interference.set(totalInterference(dirs.subarray(0, L * m), L, m));
    for (let t = L; t < T; t++) {
      const withOne = new Float64Array((L + 1) * m);
      withOne.set(dirs.subarray(0, L * m));
      withOne.set(dirs.subarray(t * m, (t + 1) * m), L * m);
      dimensionality[t] = featureDimensionality(withOne, L + 1, m)[L];
      interference[t] = totalInterference(withOne, L + 1, m)[L];
    }
    const concepts: LensConcept[] = names.map((name, t) => {
      const norm = rowNorm(dirs, m, t);
      let k95: number | null = null;
      if (carried[t]) {
        const target = opts.localisationFraction * (auroc[t] as number);
        k95 = curves[t].find((c) => c.auroc !== null && c.auroc >= target)?.k ?? m;
      }
      const topUnits = Array.from({ length: m }, (_, u) => ({ unit: u, loading: norm > 0 ? dirs[t * m + u] / norm : 0 }))
        .sort((a, b) => Math.abs(b.loading) - Math.abs(a.loading)).slice(0, 16);
      return {
        name, kind: t < labels.labels.length ? 'label' : 'compound', positives: counts[t], norm, auroc: auroc[t],
        carried: carried[t], decodable: auroc[t] !== null && auroc[t]! >= opts.decodableAuroc,
        dimensionality: dimensionality[t], interference: interference[t], curve: curves[t], k95,
        locality: !carried[t] ? 'not carried' : k95 === 1 ? 'local' : (k95 as number) >= 4 ? 'spread' : 'few',
        topUnits,
      };
    });

    const carriedIdx = concepts.flatMap((c, t) => (c.carried ? [t] : []));
    const carriedDirs = new Float64Array(carriedIdx.length * m);
    carriedIdx.forEach((t, i) => carriedDirs.set(dirs.subarray(t * m, (t + 1) * m), i * m));
    const cos = cosineMatrix(carriedDirs, carriedIdx.length, m);
    const order = clusterOrder(cos, carriedIdx.length);
    const carriedOrder = order.map((i) => carriedIdx[i]);
    const cosine = order.map((i) => order.map((j) => cos[i * carriedIdx.length + j]));
    let mostInterfering: LensResult['mostInterfering'] = null;
    for (let i = 0; i < carriedIdx.length; i++) {
      for (let j = i + 1; j < carriedIdx.length; j++) {
        const c = cos[i * carriedIdx.length + j];
        if (carriedIdx[i] >= L || carriedIdx[j] >= L) continue; // pairs of labels: a compound overlaps its own parts by construction
        if (!mostInterfering || Math.abs(c) > Math.abs(mostInterfering.cosine)) mostInterfering = { a: names[carriedIdx[i]], b: names[carriedIdx[j]], cosine: c };
      }
    }
    const orderedDirs = new Float64Array(carriedIdx.length * m);
    carriedOrder.forEach((t, i) => orderedDirs.set(dirs.subarray(t * m, (t + 1) * m), i * m));
    const proj = projectDirections(orderedDirs, carriedOrder.length, m, mulberry32(opts.seed));
    const decodableCount = concepts.filter((c) => c.decodable && c.kind === 'label').length;
    const partial = {
      units: m, effectiveDimensions, decodableCount,
      conceptsPerDimension: effectiveDimensions > 0 ? decodableCount / effectiveDimensions : 0,
      dimensionalitySum: carriedIdx.filter((t) => t < L).reduce((s, t) => s + dimensionality[t], 0), concepts, mostInterfering,
    };
    const result: LensResult = {
      version: LENS_VERSION, layer: layer.name, probes: N, probesFitted: fitCount, folds: opts.folds, seed: opts.seed, l2: opts.l2,
      ...partial, carriedOrder, cosine,
      projection: {
        x: carriedOrder.map((_, i) => proj.xy[i * 2]), y: carriedOrder.map((_, i) => proj.xy[i * 2 + 1]), kept: proj.kept,
        method: 'projection onto the top two principal axes of the carried concept directions (lengths and angles in that plane are exact; the rest is left out)',
      },
      summary: summarise(partial), caution: CAUTION, seconds: (Date.now() - started) / 1000, computedAt: new Date().toISOString(),
    };
    progress.finish();
    return { result, directions: Float32Array.from(dirs) };
  } finally {
    await kernels.release();
  }
}

/** The concept directions a unit's axis sits between: each carried concept's component ŵ_i[u] on the unit's axis. */
export function unitLoadings(result: LensResult, directions: Float32Array, unit: number): { concept: string; loading: number; auroc: number | null }[] {
  const m = result.units;
  return result.concepts.flatMap((c, t) => {
    if (!c.carried || c.norm === 0) return [];
    return [{ concept: c.name, loading: directions[t * m + unit] / c.norm, auroc: c.auroc }];
  }).sort((a, b) => Math.abs(b.loading) - Math.abs(a.loading));
}
