/**
 * Training a TopK dictionary out of core: the data come one chunk of probes at a time from a `ChunkSource`
 * (a study layer's cached chunks, or an in-memory array in tests), so memory holds the weights, their Adam moments
 * and one chunk — never every probe. Each epoch visits the chunks in a seeded order and each chunk's probes in a
 * seeded order; a checkpoint after every epoch lets a cancelled or killed run resume from the last saved epoch.
 */
import { SkeinError } from '../errors.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { mulberry32, shuffle } from '../random.ts';
import { adamStep, batchGradients, centre, codesFromPreacts, decode, initSae, newAdam, projectDecoderGrad, zeroGrads, type AdamState, type Sae } from './sae.ts';
import type { Encoder } from './encoder.ts';

export interface ChunkSource {
  probes: number;
  units: number;
  chunks: number;
  /** Chunk c's probes, probe-major [length × units]. */
  readChunk(c: number): Float32Array;
}

export interface DictionaryOptions {
  expansion: number;
  k: number;
  epochs: number;
  batch: number;
  lr: number;
  seed: number;
  /** Auxiliary loss weight α and features used, k_aux (Gao et al. 2024 §A.2: α = 1/32, k_aux = d/2). */
  auxAlpha: number;
  kAux: number | null;
  /** A feature is dead for the auxiliary loss once it has not fired for this many probes (null: one epoch). */
  deadAfter: number | null;
}

export const defaultDictionaryOptions: DictionaryOptions = {
  expansion: 4, k: 32, epochs: 10, batch: 256, lr: 5e-3, seed: 1, auxAlpha: 1 / 32, kAux: null, deadAfter: null,
};

/**
 * Training state in the normalised space the optimiser sees: inputs divided by `scale`, the root mean squared norm
 * of the centred data (Gao et al. 2024 §2.1 normalise inputs so the learning rate does not depend on the layer's
 * scale). `toStoredSae` folds the scale back into the biases.
 */
export interface TrainState {
  sae: Sae;
  adam: AdamState;
  scale: number;
  epoch: number;
  /** Probes seen since each feature last fired. */
  sinceFired: Float64Array;
  losses: number[];
}

export interface TrainHooks {
  signal?: AbortSignal;
  onProgress?: (p: ProgressReport) => void;
  /** Called after every epoch with the state to save; a resume passes the last one back as `resume`. */
  onEpoch?: (state: TrainState) => void;
  resume?: TrainState | null;
}

function cancelled(): SkeinError {
  return new SkeinError({ code: 'cancelled', message: 'Dictionary training cancelled. Run it again to resume from the last saved epoch.' });
}

/** Mean and root mean squared centred norm, in one streaming pass (float64 sums). */
export function dataMoments(src: ChunkSource): { mean: Float32Array; scale: number } {
  const d = src.units;
  const sum = new Float64Array(d), sq = new Float64Array(d);
  for (let c = 0; c < src.chunks; c++) {
    const x = src.readChunk(c);
    const n = x.length / d;
    for (let b = 0; b < n; b++) for (let i = 0; i < d; i++) { const v = x[b * d + i]; sum[i] += v; sq[i] += v * v; }
  }
  const mean = new Float32Array(d);
  let total = 0;
  for (let i = 0; i < d; i++) { mean[i] = sum[i] / src.probes; total += sq[i] / src.probes - mean[i] * mean[i]; }
  return { mean, scale: total > 0 ? Math.sqrt(total) : 1 };
}

export async function trainDictionary(src: ChunkSource, options: Partial<DictionaryOptions>, encoder: Encoder, hooks: TrainHooks = {}): Promise<TrainState> {
  const o = { ...defaultDictionaryOptions, ...options };
  const d = src.units;
  const m = Math.max(1, Math.round(o.expansion * d));
  if (o.k < 1 || o.k > m) throw new SkeinError({ code: 'request', where: 'k', message: `k must be between 1 and the number of features (${m}); got ${o.k}.` });
  let state = hooks.resume ?? null;
  if (!state) {
    const { mean, scale } = dataMoments(src);
    const sae = initSae(d, m, o.k, mulberry32(o.seed), Float32Array.from(mean, (v) => v / scale));
    state = { sae, adam: newAdam(sae), scale, epoch: 0, sinceFired: new Float64Array(m), losses: [] };
  }
  const { sae, adam, scale, sinceFired } = state;
  const kAux = Math.min(o.kAux ?? Math.max(1, Math.floor(d / 2)), m);
  const deadAfter = o.deadAfter ?? src.probes;
  const progress = new Progress('dictionary', o.epochs * src.probes, hooks.onProgress, state.epoch * src.probes);
  const dead = new Uint8Array(m);
  const grads = zeroGrads(sae); // reused: a fresh set per step would allocate 2 × features × units floats each time
  for (let epoch = state.epoch; epoch < o.epochs; epoch++) {
    // The epoch's own generator: a resumed epoch visits the probes in the same order as an uninterrupted one.
    const rng = mulberry32((o.seed * 1_000_003 + epoch) >>> 0);
    const order = Int32Array.from({ length: src.chunks }, (_, i) => i);
    shuffle(order, rng);
    let lossSum = 0, seen = 0;
    for (const c of order) {
      const raw = src.readChunk(c);
      const n = raw.length / d;
      const perm = Int32Array.from({ length: n }, (_, i) => i);
      shuffle(perm, rng);
      for (let start = 0; start < n; start += o.batch) {
        if (hooks.signal?.aborted) throw cancelled();
        const batch = Math.min(o.batch, n - start);
        const x = new Float32Array(batch * d);
        for (let b = 0; b < batch; b++) {
          const p = perm[start + b] * d;
          for (let i = 0; i < d; i++) x[b * d + i] = raw[p + i] / scale;
        }
        let anyDead = false;
        for (let j = 0; j < m; j++) { dead[j] = sinceFired[j] >= deadAfter ? 1 : 0; anyDead ||= dead[j] === 1; }
        const xc = centre(sae, x, batch);
        const z = await encoder.preacts(xc, batch, d, sae.wEnc, sae.bEnc, m);
        for (const g of [grads.wEnc, grads.bEnc, grads.wDec, grads.bDec]) g.fill(0);
        const r = batchGradients(sae, x, xc, z, batch, grads, { dead: anyDead ? dead : null, kAux, alpha: o.auxAlpha });
        for (let j = 0; j < m; j++) sinceFired[j] += batch;
        for (let b = 0; b < batch; b++) for (let t = 0; t < r.codes.count[b]; t++) sinceFired[r.codes.idx[b * o.k + t]] = 0;
        projectDecoderGrad(sae, grads);
        adamStep(sae, grads, adam, o.lr);
        lossSum += r.sumSquaredError; seen += batch;
        progress.advance(batch);
      }
      await new Promise((resolve) => setImmediate(resolve)); // let polls and Cancel through between chunks
    }
    state.epoch = epoch + 1;
    state.losses.push(lossSum / seen);
    hooks.onEpoch?.(state);
  }
  progress.finish();
  return state;
}

/**
 * The dictionary in the layer's own units: z = W_enc (x − b_dec) + b_enc with b_dec and b_enc times the scale gives
 * `scale` × the normalised pre-activations, so the same features fire and a_j is the feature's weight on its
 * unit-norm decoder row in activation units.
 */
export function toStoredSae(state: TrainState): Sae {
  const s = state.sae;
  return { ...s, wEnc: s.wEnc.slice(), wDec: s.wDec.slice(), bEnc: Float32Array.from(s.bEnc, (v) => v * state.scale), bDec: Float32Array.from(s.bDec, (v) => v * state.scale) };
}

export interface LayerMetrics {
  probes: number;
  /** 1 − Σ‖x − x̂‖² / Σ‖x − mean‖² (fraction of variance explained; Bricken et al. 2023, Gao et al. 2024). */
  varianceExplained: number;
  /** Mean number of active features per probe (L0). */
  meanL0: number;
  /** Features that fire on no probe. */
  deadFraction: number;
  /** Features that fire on more than `denseAbove` of the probes (common practice, no source, for the threshold). */
  denseFraction: number;
  denseAbove: number;
  /** Per feature: the fraction of probes it fires on. */
  firingRate: Float32Array;
}

/** Encodes every probe once with a stored dictionary and measures it; `onCodes` sees each chunk's sparse codes. */
export async function measureDictionary(src: ChunkSource, sae: Sae, encoder: Encoder, denseAbove = 0.1, onCodes?: (chunk: number, codes: ReturnType<typeof codesFromPreacts>, n: number) => void): Promise<LayerMetrics> {
  const d = sae.units, m = sae.features;
  const fires = new Float64Array(m);
  const sum = new Float64Array(d), sq = new Float64Array(d);
  let sse = 0, l0 = 0;
  for (let c = 0; c < src.chunks; c++) {
    const x = src.readChunk(c);
    const n = x.length / d;
    const z = await encoder.preacts(centre(sae, x, n), n, d, sae.wEnc, sae.bEnc, m);
    const codes = codesFromPreacts(z, n, m, sae.k);
    const xhat = decode(sae, codes, n, true);
    for (let i = 0; i < n * d; i++) { const e = xhat[i] - x[i]; sse += e * e; }
    for (let b = 0; b < n; b++) {
      l0 += codes.count[b];
      for (let t = 0; t < codes.count[b]; t++) fires[codes.idx[b * sae.k + t]]++;
      for (let i = 0; i < d; i++) { const v = x[b * d + i]; sum[i] += v; sq[i] += v * v; }
    }
    onCodes?.(c, codes, n);
  }
  let total = 0;
  for (let i = 0; i < d; i++) total += sq[i] - (sum[i] * sum[i]) / src.probes;
  const firingRate = Float32Array.from(fires, (f) => f / src.probes);
  let deadCount = 0, denseCount = 0;
  for (const r of firingRate) { if (r === 0) deadCount++; if (r > denseAbove) denseCount++; }
  return {
    probes: src.probes,
    varianceExplained: total > 0 ? 1 - sse / total : 0,
    meanL0: l0 / src.probes,
    deadFraction: deadCount / m,
    denseFraction: denseCount / m,
    denseAbove,
    firingRate,
  };
}
