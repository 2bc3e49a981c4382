/**
 * The demo classifier, trained in plain TypeScript with a hand-written forward and backward pass:
 * tile [3,12,12] → conv1 3→C (3×3, pad 1) → ReLU → 2×2 max-pool → flatten → narrow (Gemm) → ReLU
 * → wide (Gemm) → ReLU → head (Gemm) → 12 logits → sigmoid (multi-label, binary cross-entropy).
 */
import { gaussian, mulberry32, shuffle, type Rng } from './prng';
import * as scene from './scene';
import { conceptIndex, type TileSet } from './scene';

// Local copies: imported bindings compile to getter calls, which are slow inside the inner loops.
const TILE_SIZE = scene.TILE_SIZE;
const TILE_CHANNELS = scene.TILE_CHANNELS;
const TILE_VALUES = scene.TILE_VALUES;
const CONCEPT_COUNT = scene.CONCEPT_COUNT;
const FAMILY_COUNT = scene.FAMILY_COUNT;

const KERNEL = 3;
const PADDED = TILE_SIZE + 2;
const POOLED = TILE_SIZE / 2;

export interface NetShape {
  convChannels: number;
  narrow: number;
  wide: number;
}

export interface NetParams {
  shape: NetShape;
  conv1W: Float64Array; // [C,3,3,3]
  conv1B: Float64Array; // [C]
  narrowW: Float64Array; // [narrow, C*6*6] (Gemm with transB=1)
  narrowB: Float64Array;
  wideW: Float64Array; // [wide, narrow]
  wideB: Float64Array;
  headW: Float64Array; // [12, wide]
  headB: Float64Array;
}

type ParamName = Exclude<keyof NetParams, 'shape'>;
export const PARAM_NAMES: ParamName[] = ['conv1W', 'conv1B', 'narrowW', 'narrowB', 'wideW', 'wideB', 'headW', 'headB'];

export function flatSize(shape: NetShape): number {
  return shape.convChannels * POOLED * POOLED;
}

function heInit(rng: Rng, count: number, fanIn: number): Float64Array {
  const out = new Float64Array(count);
  const sd = Math.sqrt(2 / fanIn); // He et al. 2015 initialisation for ReLU layers
  for (let k = 0; k < count; k++) out[k] = sd * gaussian(rng);
  return out;
}

export function initParams(shape: NetShape, seed: number): NetParams {
  const rng = mulberry32(seed);
  const C = shape.convChannels;
  const flat = flatSize(shape);
  return {
    shape,
    conv1W: heInit(rng, C * TILE_CHANNELS * KERNEL * KERNEL, TILE_CHANNELS * KERNEL * KERNEL),
    conv1B: new Float64Array(C),
    narrowW: heInit(rng, shape.narrow * flat, flat),
    narrowB: new Float64Array(shape.narrow),
    wideW: heInit(rng, shape.wide * shape.narrow, shape.narrow),
    wideB: new Float64Array(shape.wide),
    headW: heInit(rng, CONCEPT_COUNT * shape.wide, shape.wide),
    headB: new Float64Array(CONCEPT_COUNT).fill(Math.log(1 / 3)), // logit of the 1-in-4 base rate
  };
}

/** Median of a copy of `values`. */
function median(values: Float64Array): number {
  const sorted = Float64Array.from(values).sort();
  const mid = sorted.length >> 1;
  return sorted.length % 2 ? sorted[mid] : (sorted[mid - 1] + sorted[mid]) / 2;
}

/**
 * Data-dependent bias start: each ReLU unit begins active on about half of the first `sampleCount` tiles.
 * Without it, units whose weighted input has the same sign on every tile (the dark background dominates) start dead.
 * With `onlyDead`, only units silent on all of those tiles are reset, which revives units that died in training.
 * (In the spirit of data-dependent initialisation, Krähenbühl et al. 2016; the median rule is ours.)
 * Returns how many units were reset.
 */
export function calibrateBiases(p: NetParams, set: TileSet, sampleCount: number, onlyDead = false): number {
  const count = Math.min(sampleCount, set.count);
  const trace = newTrace(p.shape);
  const plane = TILE_SIZE * TILE_SIZE;
  const layers: { bias: Float64Array; pre: (t: Trace) => Float64Array; perUnit: number }[] = [
    { bias: p.conv1B, pre: (t) => t.convPre, perUnit: plane },
    { bias: p.narrowB, pre: (t) => t.narrowPre, perUnit: 1 },
    { bias: p.wideB, pre: (t) => t.widePre, perUnit: 1 },
  ];
  let reset = 0;
  for (const layer of layers) {
    const units = layer.bias.length;
    const samples = Array.from({ length: units }, () => new Float64Array(count * layer.perUnit));
    for (let i = 0; i < count; i++) {
      forward(p, set.tiles, i * TILE_VALUES, trace);
      const pre = layer.pre(trace);
      for (let u = 0; u < units; u++) samples[u].set(pre.subarray(u * layer.perUnit, (u + 1) * layer.perUnit), i * layer.perUnit);
    }
    for (let u = 0; u < units; u++) {
      const withoutBias = samples[u].map((z) => z - layer.bias[u]);
      if (onlyDead && samples[u].some((z) => z > 0)) continue;
      layer.bias[u] = -median(withoutBias);
      reset++;
    }
  }
  return reset;
}

/** The same parameters rounded to float32, i.e. exactly what the exported ONNX file holds. */
export function roundedToFloat32(params: NetParams): NetParams {
  const out = { ...params };
  for (const name of PARAM_NAMES) out[name] = Float64Array.from(Float32Array.from(params[name]));
  return out;
}

/** Per-sample scratch: every intermediate the backward pass needs. */
export interface Trace {
  padded: Float64Array; // [3,14,14]
  convPre: Float64Array; // [C,12,12]
  convAct: Float64Array;
  pooled: Float64Array; // [C*6*6], C-order like ONNX Flatten
  poolArg: Int32Array; // index into convAct of each pooled max
  narrowPre: Float64Array;
  narrowAct: Float64Array;
  widePre: Float64Array;
  wideAct: Float64Array;
  logits: Float64Array;
}

export function newTrace(shape: NetShape): Trace {
  const C = shape.convChannels;
  return {
    padded: new Float64Array(TILE_CHANNELS * PADDED * PADDED),
    convPre: new Float64Array(C * TILE_SIZE * TILE_SIZE),
    convAct: new Float64Array(C * TILE_SIZE * TILE_SIZE),
    pooled: new Float64Array(flatSize(shape)),
    poolArg: new Int32Array(flatSize(shape)),
    narrowPre: new Float64Array(shape.narrow),
    narrowAct: new Float64Array(shape.narrow),
    widePre: new Float64Array(shape.wide),
    wideAct: new Float64Array(shape.wide),
    logits: new Float64Array(CONCEPT_COUNT),
  };
}

/** y = W x + b for W [rows, cols] (row-major), then ReLU into `act` when given. */
function dense(W: Float64Array, b: Float64Array, x: Float64Array, pre: Float64Array, act: Float64Array | null): void {
  const cols = x.length;
  for (let r = 0; r < pre.length; r++) {
    let sum = b[r];
    const row = r * cols;
    for (let c = 0; c < cols; c++) sum += W[row + c] * x[c];
    pre[r] = sum;
    if (act) act[r] = sum > 0 ? sum : 0;
  }
}

/** Forward pass of one tile (read from `tiles` at `offset`) into `t`. */
export function forward(p: NetParams, tiles: Float32Array, offset: number, t: Trace): void {
  const C = p.shape.convChannels;
  const plane = TILE_SIZE * TILE_SIZE;
  const padded = t.padded;
  for (let c = 0; c < TILE_CHANNELS; c++) {
    for (let y = 0; y < TILE_SIZE; y++) {
      for (let x = 0; x < TILE_SIZE; x++) {
        padded[c * PADDED * PADDED + (y + 1) * PADDED + x + 1] = tiles[offset + c * plane + y * TILE_SIZE + x];
      }
    }
  }
  const convPre = t.convPre;
  for (let oc = 0; oc < C; oc++) {
    convPre.fill(p.conv1B[oc], oc * plane, (oc + 1) * plane);
    for (let ic = 0; ic < TILE_CHANNELS; ic++) {
      for (let ky = 0; ky < KERNEL; ky++) {
        for (let kx = 0; kx < KERNEL; kx++) {
          const w = p.conv1W[((oc * TILE_CHANNELS + ic) * KERNEL + ky) * KERNEL + kx];
          const base = ic * PADDED * PADDED + ky * PADDED + kx;
          for (let y = 0; y < TILE_SIZE; y++) {
            const src = base + y * PADDED;
            const dst = oc * plane + y * TILE_SIZE;
            for (let x = 0; x < TILE_SIZE; x++) convPre[dst + x] += w * padded[src + x];
          }
        }
      }
    }
  }
  for (let k = 0; k < convPre.length; k++) t.convAct[k] = convPre[k] > 0 ? convPre[k] : 0;
  for (let c = 0; c < C; c++) {
    for (let py = 0; py < POOLED; py++) {
      for (let px = 0; px < POOLED; px++) {
        let best = -Infinity;
        let arg = 0;
        for (let dy = 0; dy < 2; dy++) {
          for (let dx = 0; dx < 2; dx++) {
            const k = c * plane + (2 * py + dy) * TILE_SIZE + 2 * px + dx;
            if (t.convAct[k] > best) {
              best = t.convAct[k];
              arg = k;
            }
          }
        }
        const q = c * POOLED * POOLED + py * POOLED + px;
        t.pooled[q] = best;
        t.poolArg[q] = arg;
      }
    }
  }
  dense(p.narrowW, p.narrowB, t.pooled, t.narrowPre, t.narrowAct);
  dense(p.wideW, p.wideB, t.narrowAct, t.widePre, t.wideAct);
  dense(p.headW, p.headB, t.wideAct, t.logits, null);
}

export function sigmoid(z: number): number {
  return z >= 0 ? 1 / (1 + Math.exp(-z)) : Math.exp(z) / (1 + Math.exp(z));
}

export type Grads = Record<ParamName, Float64Array>;

function zeroGrads(p: NetParams): Grads {
  const g = {} as Grads;
  for (const name of PARAM_NAMES) g[name] = new Float64Array(p[name].length);
  return g;
}

/** Scratch for the backward pass of one sample. */
interface BackScratch {
  dLogits: Float64Array;
  dWide: Float64Array;
  dNarrow: Float64Array;
  dPooled: Float64Array;
  dConv: Float64Array;
}

/** dx = Wᵀ dy, dW += dy xᵀ, db += dy for one dense layer. */
function denseBack(W: Float64Array, x: Float64Array, dy: Float64Array, dW: Float64Array, db: Float64Array, dx: Float64Array | null): void {
  const cols = x.length;
  if (dx) dx.fill(0);
  for (let r = 0; r < dy.length; r++) {
    const g = dy[r];
    if (g === 0) continue;
    db[r] += g;
    const row = r * cols;
    for (let c = 0; c < cols; c++) {
      dW[row + c] += g * x[c];
      if (dx) dx[c] += g * W[row + c];
    }
  }
}

/** Accumulates gradients of the loss for one traced sample; dLogits already holds ∂loss/∂logits. */
function backward(p: NetParams, t: Trace, s: BackScratch, g: Grads, wideSparsity: number): void {
  denseBack(p.headW, t.wideAct, s.dLogits, g.headW, g.headB, s.dWide);
  for (let k = 0; k < s.dWide.length; k++) s.dWide[k] = t.widePre[k] > 0 ? s.dWide[k] + wideSparsity : 0;
  denseBack(p.wideW, t.narrowAct, s.dWide, g.wideW, g.wideB, s.dNarrow);
  for (let k = 0; k < s.dNarrow.length; k++) if (t.narrowPre[k] <= 0) s.dNarrow[k] = 0;
  denseBack(p.narrowW, t.pooled, s.dNarrow, g.narrowW, g.narrowB, s.dPooled);
  s.dConv.fill(0);
  for (let q = 0; q < s.dPooled.length; q++) s.dConv[t.poolArg[q]] += s.dPooled[q];
  const C = p.shape.convChannels;
  const plane = TILE_SIZE * TILE_SIZE;
  for (let oc = 0; oc < C; oc++) {
    let biasGrad = 0;
    for (let k = oc * plane; k < (oc + 1) * plane; k++) {
      if (t.convPre[k] <= 0) s.dConv[k] = 0;
      biasGrad += s.dConv[k];
    }
    g.conv1B[oc] += biasGrad;
    for (let ic = 0; ic < TILE_CHANNELS; ic++) {
      for (let ky = 0; ky < KERNEL; ky++) {
        for (let kx = 0; kx < KERNEL; kx++) {
          const base = ic * PADDED * PADDED + ky * PADDED + kx;
          let sum = 0;
          for (let y = 0; y < TILE_SIZE; y++) {
            const src = base + y * PADDED;
            const dst = oc * plane + y * TILE_SIZE;
            for (let x = 0; x < TILE_SIZE; x++) sum += s.dConv[dst + x] * t.padded[src + x];
          }
          g.conv1W[((oc * TILE_CHANNELS + ic) * KERNEL + ky) * KERNEL + kx] += sum;
        }
      }
    }
  }
}

export interface TrainOptions {
  epochs: number;
  batchSize: number;
  learningRate: number;
  /** L1 weight on wide-layer activations (pushes that layer towards few active units per tile). */
  wideSparsity: number;
  /** Heavy-ball momentum coefficient of the averaged gradient. */
  momentum: number;
  seed: number;
  /** After each epoch, reset the bias of units silent on the first this-many training tiles (0: never). */
  reviveOn: number;
}

/** Targets of one probe: 1 for its three concepts, 0 elsewhere. */
function fillTargets(set: TileSet, probe: number, into: Float64Array): void {
  into.fill(0);
  for (let f = 0; f < FAMILY_COUNT; f++) into[conceptIndex(set, probe, f)] = 1;
}

/**
 * Minibatch SGD with momentum, v ← μv + (1−μ)g, w ← w − ηv (common practice, no source); returns each epoch's mean loss.
 * Plain SGD rather than Adam: Adam's per-weight scaling tends to line units up with single attributes.
 */
export function train(p: NetParams, set: TileSet, opts: TrainOptions): number[] {
  const rng = mulberry32(opts.seed);
  const grads = zeroGrads(p);
  const velocity = zeroGrads(p);
  const trace = newTrace(p.shape);
  const scratch: BackScratch = {
    dLogits: new Float64Array(CONCEPT_COUNT),
    dWide: new Float64Array(p.shape.wide),
    dNarrow: new Float64Array(p.shape.narrow),
    dPooled: new Float64Array(flatSize(p.shape)),
    dConv: new Float64Array(p.shape.convChannels * TILE_SIZE * TILE_SIZE),
  };
  const targets = new Float64Array(CONCEPT_COUNT);
  const order = new Int32Array(set.count);
  for (let i = 0; i < set.count; i++) order[i] = i;
  const losses: number[] = [];
  for (let epoch = 0; epoch < opts.epochs; epoch++) {
    shuffle(order, rng);
    let lossSum = 0;
    for (let start = 0; start < set.count; start += opts.batchSize) {
      const end = Math.min(set.count, start + opts.batchSize);
      for (const name of PARAM_NAMES) grads[name].fill(0);
      for (let b = start; b < end; b++) {
        const probe = order[b];
        forward(p, set.tiles, probe * TILE_VALUES, trace);
        fillTargets(set, probe, targets);
        for (let k = 0; k < CONCEPT_COUNT; k++) {
          const z = trace.logits[k];
          // Binary cross-entropy on logits, stable form: max(z,0) − z·y + log(1 + e^−|z|).
          lossSum += Math.max(z, 0) - z * targets[k] + Math.log1p(Math.exp(-Math.abs(z)));
          scratch.dLogits[k] = sigmoid(z) - targets[k];
        }
        for (let k = 0; k < p.shape.wide; k++) lossSum += opts.wideSparsity * trace.wideAct[k];
        backward(p, trace, scratch, grads, opts.wideSparsity);
      }
      const scale = 1 / (end - start);
      for (const name of PARAM_NAMES) {
        const w = p[name];
        const g = grads[name];
        const v = velocity[name];
        for (let k = 0; k < w.length; k++) {
          v[k] = opts.momentum * v[k] + (1 - opts.momentum) * (g[k] * scale);
          w[k] -= opts.learningRate * v[k];
        }
      }
    }
    losses.push(lossSum / set.count);
    if (opts.reviveOn > 0) calibrateBiases(p, set, opts.reviveOn, true);
  }
  return losses;
}

/** Forward pass over a whole set: probabilities [count,12] and the narrow and wide ReLU outputs. */
export interface Evaluation {
  probabilities: Float64Array;
  narrow: Float64Array; // [count, narrow]
  wide: Float64Array; // [count, wide]
  /** Per family: share of probes whose highest-scoring concept in that family is the true one. */
  familyAccuracy: number[];
}

export function evaluate(p: NetParams, set: TileSet): Evaluation {
  const trace = newTrace(p.shape);
  const probabilities = new Float64Array(set.count * CONCEPT_COUNT);
  const narrow = new Float64Array(set.count * p.shape.narrow);
  const wide = new Float64Array(set.count * p.shape.wide);
  const correct = new Array<number>(FAMILY_COUNT).fill(0);
  const perFamily = CONCEPT_COUNT / FAMILY_COUNT;
  for (let i = 0; i < set.count; i++) {
    forward(p, set.tiles, i * TILE_VALUES, trace);
    for (let k = 0; k < CONCEPT_COUNT; k++) probabilities[i * CONCEPT_COUNT + k] = sigmoid(trace.logits[k]);
    narrow.set(trace.narrowAct, i * p.shape.narrow);
    wide.set(trace.wideAct, i * p.shape.wide);
    for (let f = 0; f < FAMILY_COUNT; f++) {
      let best = 0;
      for (let k = 1; k < perFamily; k++) if (trace.logits[f * perFamily + k] > trace.logits[f * perFamily + best]) best = k;
      if (f * perFamily + best === conceptIndex(set, i, f)) correct[f]++;
    }
  }
  return { probabilities, narrow, wide, familyAccuracy: correct.map((c) => c / set.count) };
}
