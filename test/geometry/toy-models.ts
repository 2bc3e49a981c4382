/**
 * Toy models of superposition, trained here (Elhage et al. 2022, "Toy Models of Superposition", the ReLU output
 * model): x ∈ R^n with each feature 0 with probability S (the sparsity) and uniform on [0, 1] otherwise;
 * h = W x ∈ R^m (m < n); x' = ReLU(Wᵀ h + b); loss Σ_i I_i (x_i − x'_i)² with importances I; Adam.
 * Several seeded restarts, the lowest loss kept (the paper trains many instances, from memory).
 * Exported to ONNX as `x` → Gemm `hidden` (the layer Skein scans) → MatMul + bias → Relu `recon`, with a probe set
 * whose labels say which features are on.
 *
 * `npx tsx test/geometry/toy-models.ts` trains the three fixtures and prints each feature's weight column and
 * feature dimensionality computed from the weights.
 */
import path from 'node:path';
import { buildModel } from '../../core/model/writer.ts';
import { mulberry32, type Rng } from '../../core/random.ts';
import { featureDimensionality } from '../../core/geometry/stats.ts';
import { writeProbeSet } from '../support/fixtures.ts';

export interface ToySpec {
  name: string;
  features: number;
  hidden: number;
  sparsity: number;
  importance: (i: number) => number;
  /** A probe carries label f<i> when x_i > this (0 for sparse features: "on"; 0.5 for dense ones: "high"). */
  labelAbove: number;
  steps: number;
  restarts: number;
  seed: number;
}

/** The three published geometries the lens must reproduce (Elhage et al. 2022, from memory). */
export const TOYS: Record<'pentagon' | 'antipodal' | 'dense', ToySpec> = {
  // 5 features in 2 dimensions, equal importance, high sparsity: a regular pentagon, D = 2/5 each.
  pentagon: { name: 'pentagon', features: 5, hidden: 2, sparsity: 0.95, importance: () => 1, labelAbove: 0, steps: 4000, restarts: 4, seed: 51 },
  // 2 features in 1 dimension, sparse: an antipodal pair, D = 1/2 each.
  antipodal: { name: 'antipodal', features: 2, hidden: 1, sparsity: 0.95, importance: () => 1, labelAbove: 0, steps: 3000, restarts: 4, seed: 21 },
  // Dense features of decaying importance: the 2 most important get a dimension each, the rest none.
  dense: { name: 'dense', features: 5, hidden: 2, sparsity: 0, importance: (i) => 0.7 ** i, labelAbove: 0.5, steps: 3000, restarts: 3, seed: 52 },
};

export interface ToyModel { spec: ToySpec; w: Float64Array; b: Float64Array; loss: number }

function sample(rng: Rng, spec: ToySpec, out: Float64Array): void {
  for (let i = 0; i < spec.features; i++) out[i] = rng() < spec.sparsity ? 0 : rng();
}

/** Mean weighted reconstruction loss on a batch (`w` row-major [hidden × features]). */
function batchLoss(spec: ToySpec, w: Float64Array, b: Float64Array, xs: Float64Array[]): number {
  const { features: n, hidden: m } = spec;
  let total = 0;
  const h = new Float64Array(m);
  for (const x of xs) {
    for (let k = 0; k < m; k++) { let s = 0; for (let i = 0; i < n; i++) s += w[k * n + i] * x[i]; h[k] = s; }
    for (let i = 0; i < n; i++) {
      let o = b[i];
      for (let k = 0; k < m; k++) o += w[k * n + i] * h[k];
      total += spec.importance(i) * (x[i] - Math.max(0, o)) ** 2;
    }
  }
  return total / xs.length;
}

function trainOnce(spec: ToySpec, seed: number): ToyModel {
  const { features: n, hidden: m } = spec;
  const rng = mulberry32(seed);
  const params = new Float64Array(m * n + n);
  // Xavier-normal start (Glorot & Bengio 2010), biases zero.
  for (let k = 0; k < m * n; k++) params[k] = (Math.sqrt(-2 * Math.log(1 - rng())) * Math.cos(2 * Math.PI * rng())) * Math.sqrt(2 / (m + n));
  const grad = new Float64Array(params.length);
  const m1 = new Float64Array(params.length);
  const m2 = new Float64Array(params.length);
  const [beta1, beta2, eps, lr, batch] = [0.9, 0.999, 1e-8, 0.01, 512];
  const x = new Float64Array(n);
  const h = new Float64Array(m);
  const d = new Float64Array(n);
  for (let step = 1; step <= spec.steps; step++) {
    grad.fill(0);
    for (let s = 0; s < batch; s++) {
      sample(rng, spec, x);
      for (let k = 0; k < m; k++) { let v = 0; for (let i = 0; i < n; i++) v += params[k * n + i] * x[i]; h[k] = v; }
      for (let i = 0; i < n; i++) {
        let o = params[m * n + i];
        for (let k = 0; k < m; k++) o += params[k * n + i] * h[k];
        d[i] = o > 0 ? (2 * spec.importance(i) * (o - x[i])) / batch : 0;
        grad[m * n + i] += d[i];
      }
      for (let k = 0; k < m; k++) {
        let dh = 0;
        for (let i = 0; i < n; i++) { grad[k * n + i] += h[k] * d[i]; dh += params[k * n + i] * d[i]; }
        for (let i = 0; i < n; i++) grad[k * n + i] += dh * x[i];
      }
    }
    // Adam (Kingma & Ba 2015).
    for (let k = 0; k < params.length; k++) {
      m1[k] = beta1 * m1[k] + (1 - beta1) * grad[k];
      m2[k] = beta2 * m2[k] + (1 - beta2) * grad[k] * grad[k];
      params[k] -= (lr * (m1[k] / (1 - beta1 ** step))) / (Math.sqrt(m2[k] / (1 - beta2 ** step)) + eps);
    }
  }
  const evalRng = mulberry32(spec.seed + 1000);
  const xs = Array.from({ length: 4096 }, () => { const v = new Float64Array(n); sample(evalRng, spec, v); return v; });
  const w = params.slice(0, m * n);
  const b = params.slice(m * n);
  return { spec, w, b, loss: batchLoss(spec, w, b, xs) };
}

export function trainToy(spec: ToySpec): ToyModel {
  let best: ToyModel | null = null;
  for (let r = 0; r < spec.restarts; r++) {
    const model = trainOnce(spec, spec.seed * 100 + r);
    if (!best || model.loss < best.loss) best = model;
  }
  return best!;
}

/** Feature i's embedding: column i of W. */
export function weightColumn(model: ToyModel, i: number): Float64Array {
  const { features: n, hidden: m } = model.spec;
  return Float64Array.from({ length: m }, (_, k) => model.w[k * n + i]);
}

/** Feature dimensionality from the trained weights themselves (rows = features). */
export function dimensionalityFromWeights(model: ToyModel): Float64Array {
  const { features: n, hidden: m } = model.spec;
  const rows = new Float64Array(n * m);
  for (let i = 0; i < n; i++) rows.set(weightColumn(model, i), i * m);
  return featureDimensionality(rows, n, m);
}

export function toyOnnx(model: ToyModel): Uint8Array {
  const { features: n, hidden: m } = model.spec;
  return buildModel({
    name: `toy-${model.spec.name}`,
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', n] }],
    outputs: [{ name: 'recon', elemType: 'float32', dims: ['batch', n] }],
    initializers: [
      { name: 'W', dims: [m, n], data: Float32Array.from(model.w) },
      { name: 'b', dims: [n], data: Float32Array.from(model.b) },
    ],
    nodes: [
      { op: 'Gemm', name: 'hidden', inputs: ['x', 'W'], outputs: ['hidden'], attributes: { transB: { i: 1 } } },
      { op: 'MatMul', name: 'up', inputs: ['hidden', 'W'], outputs: ['up'] },
      { op: 'Add', name: 'add_bias', inputs: ['up', 'b'], outputs: ['pre'] },
      { op: 'Relu', name: 'recon', inputs: ['pre'], outputs: ['recon'] },
    ],
  });
}

/** A probe set of `count` fresh samples: input `x`, label f<i> when feature i is above the spec's threshold. */
export function writeToyProbes(model: ToyModel, dir: string, count: number, seed: number): string {
  const { features: n } = model.spec;
  const rng = mulberry32(seed);
  const rows = new Float32Array(count * n);
  const labels: string[][] = [];
  const x = new Float64Array(n);
  for (let p = 0; p < count; p++) {
    sample(rng, model.spec, x);
    rows.set(x, p * n);
    labels.push(Array.from({ length: n }, (_, i) => i).filter((i) => x[i] > model.spec.labelAbove).map((i) => `f${i}`));
  }
  return writeProbeSet({ dir, inputName: 'x', rows, rowShape: [n], labels });
}

if (process.argv[1] && path.resolve(process.argv[1]) === path.resolve(new URL(import.meta.url).pathname)) {
  for (const spec of Object.values(TOYS)) {
    const model = trainToy(spec);
    const D = dimensionalityFromWeights(model);
    console.log(`${spec.name}: loss ${model.loss.toFixed(5)}`);
    for (let i = 0; i < spec.features; i++) console.log(`  f${i} W=[${Array.from(weightColumn(model, i), (v) => v.toFixed(3)).join(', ')}] D=${D[i].toFixed(3)}`);
  }
}
