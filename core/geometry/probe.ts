/**
 * Linear probes: L2-regularised logistic regression per concept, k-fold cross-validated with a fixed seed,
 * scored by the AUROC of the pooled out-of-fold decision values. All (concept, fold) fits of a batch run in lock
 * step, so each step is two matrix products over the probes instead of one pass per fit.
 */
import { mulberry32, shuffle } from '../random.ts';
import type { Kernels } from './kernels.ts';
import { aurocOf } from './stats.ts';

/** Fold of each probe: a seeded shuffle dealt round-robin into `folds` parts (k-fold CV; Stone 1974). */
export function foldsOf(count: number, folds: number, seed: number): Int32Array {
  const order = Int32Array.from({ length: count }, (_, i) => i);
  shuffle(order, mulberry32(seed));
  const fold = new Int32Array(count);
  for (let i = 0; i < count; i++) fold[order[i]] = i % folds;
  return fold;
}

export interface ProbeOptions {
  /** λ of the mean log-loss + (λ/2)‖w‖² objective (sklearn's C = 1 / (λ · n_train)); the intercept is not penalised. */
  l2: number;
  folds: number;
  /** Columns (concept × fold fits) evaluated together. */
  batchColumns: number;
  maxIterations: number;
  /** Stop when the largest gradient component is below this. */
  gradientTolerance: number;
}

export const defaultProbeOptions: ProbeOptions = { l2: 1e-3, folds: 5, batchColumns: 64, maxIterations: 300, gradientTolerance: 1e-5 };

export interface ProbeResult {
  /** Pooled out-of-fold AUROC per concept; NaN when a concept has too few positives or negatives to fold. */
  auroc: Float64Array;
  /** Out-of-fold decision values, [concepts × n]. */
  scores: Float64Array;
}

interface Column {
  target: number;
  fold: number;
  x: Float64Array;
  f: number;
  g: Float64Array;
  d: Float64Array;
  t: number;
  s: Float64Array[];
  y: Float64Array[];
  rho: number[];
  iterations: number;
  done: boolean;
}

const HISTORY = 10;
const dot = (a: Float64Array, b: Float64Array) => { let s = 0; for (let i = 0; i < a.length; i++) s += a[i] * b[i]; return s; };
const maxAbs = (a: Float64Array) => { let m = 0; for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i])); return m; };

/** L-BFGS search direction by the two-loop recursion (Nocedal & Wright, "Numerical Optimization", Alg. 7.4). */
function lbfgsDirection(c: Column): Float64Array {
  const q = Float64Array.from(c.g);
  const alpha: number[] = [];
  for (let i = c.s.length - 1; i >= 0; i--) {
    const a = c.rho[i] * dot(c.s[i], q);
    alpha[i] = a;
    for (let j = 0; j < q.length; j++) q[j] -= a * c.y[i][j];
  }
  if (c.s.length) {
    const last = c.s.length - 1;
    const gamma = dot(c.s[last], c.y[last]) / dot(c.y[last], c.y[last]);
    for (let j = 0; j < q.length; j++) q[j] *= gamma;
  }
  for (let i = 0; i < c.s.length; i++) {
    const b = c.rho[i] * dot(c.y[i], q);
    for (let j = 0; j < q.length; j++) q[j] += c.s[i][j] * (alpha[i] - b);
  }
  for (let j = 0; j < q.length; j++) q[j] = -q[j];
  return q;
}

/**
 * Fits every concept's probe on every fold. `x` is [n × k] row-major float32 (standardised units), `targets[t][i]`
 * is 1 when probe i carries concept t. `onStep` is awaited after each batched evaluation (progress, cancel).
 */
export async function crossValidatedProbes(
  kernels: Kernels, x: Float32Array, n: number, k: number, targets: Uint8Array[], fold: Int32Array,
  opts: ProbeOptions, onStep: () => Promise<void> = async () => {},
): Promise<ProbeResult> {
  const T = targets.length;
  const F = opts.folds;
  const auroc = new Float64Array(T).fill(NaN);
  const scores = new Float64Array(T * n);
  const foldable: number[] = [];
  for (let t = 0; t < T; t++) {
    let pos = 0;
    for (let i = 0; i < n; i++) pos += targets[t][i];
    if (pos >= F && n - pos >= F) foldable.push(t);
  }
  const trainSize = new Float64Array(F);
  for (let i = 0; i < n; i++) for (let f = 0; f < F; f++) if (fold[i] !== f) trainSize[f]++;
  const all = foldable.flatMap((t) => Array.from({ length: F }, (_, f) => ({ t, f })));
  for (let start = 0; start < all.length; start += opts.batchColumns) {
    const batch = all.slice(start, start + opts.batchColumns);
    const C = batch.length;
    const y = new Float32Array(n * C);
    const m = new Float32Array(n * C);
    batch.forEach(({ t, f }, c) => {
      for (let i = 0; i < n; i++) {
        y[i * C + c] = targets[t][i];
        m[i * C + c] = fold[i] === f ? 0 : 1 / trainSize[f];
      }
    });
    const cols: Column[] = batch.map(({ t, f }) => ({
      target: t, fold: f, x: new Float64Array(k + 1), f: 0, g: new Float64Array(k + 1), d: new Float64Array(k + 1),
      t: 1, s: [], y: [], rho: [], iterations: 0, done: false,
    }));
    const w = new Float32Array(k * C);
    const b = new Float32Array(C);
    const evaluate = async (points: Float64Array[]) => {
      for (let c = 0; c < C; c++) {
        const p = points[c];
        for (let u = 0; u < k; u++) w[u * C + c] = p[u];
        b[c] = p[k];
      }
      const out = await kernels.logistic(x, n, k, w, b, y, m, C);
      await onStep();
      return points.map((p, c) => {
        const g = new Float64Array(k + 1);
        let penalty = 0;
        for (let u = 0; u < k; u++) {
          g[u] = out.grad[u * C + c] + opts.l2 * p[u];
          penalty += p[u] * p[u];
        }
        g[k] = out.gradBias[c];
        return { f: out.loss[c] + 0.5 * opts.l2 * penalty, g, z: out.z };
      });
    };
    const first = await evaluate(cols.map((c) => c.x));
    cols.forEach((c, i) => {
      c.f = first[i].f;
      c.g = first[i].g;
      c.d = c.g.map((v) => -v);
      c.t = 1 / Math.max(1, Math.sqrt(dot(c.g, c.g)));
      c.done = maxAbs(c.g) < opts.gradientTolerance;
    });
    while (cols.some((c) => !c.done)) {
      const trial = cols.map((c) => (c.done ? c.x : c.x.map((v, j) => v + c.t * c.d[j])));
      const r = await evaluate(trial);
      cols.forEach((c, i) => {
        if (c.done) return;
        const slope = dot(c.g, c.d);
        if (r[i].f <= c.f + 1e-4 * c.t * slope) {
          const s = trial[i].map((v, j) => v - c.x[j]);
          const yv = r[i].g.map((v, j) => v - c.g[j]);
          const sy = dot(s, yv);
          if (sy > 1e-12) {
            c.s.push(s); c.y.push(yv); c.rho.push(1 / sy);
            if (c.s.length > HISTORY) { c.s.shift(); c.y.shift(); c.rho.shift(); }
          }
          const decrease = c.f - r[i].f;
          c.x = trial[i]; c.f = r[i].f; c.g = r[i].g; c.iterations++;
          if (maxAbs(c.g) < opts.gradientTolerance || decrease <= 1e-12 * Math.max(1, Math.abs(c.f)) || c.iterations >= opts.maxIterations) { c.done = true; return; }
          c.d = lbfgsDirection(c);
          if (dot(c.g, c.d) >= 0) { c.s = []; c.y = []; c.rho = []; c.d = c.g.map((v) => -v); }
          c.t = 1;
        } else {
          c.t *= 0.5;
          if (c.t < 1e-12) c.done = true;
        }
      });
    }
    // The last evaluation was at each column's current point only if every column accepted; evaluate once more.
    const z = (await evaluate(cols.map((c) => c.x)))[0].z;
    cols.forEach((c, ci) => {
      for (let i = 0; i < n; i++) if (fold[i] === c.fold) scores[c.target * n + i] = z[i * C + ci];
    });
  }
  for (const t of foldable) auroc[t] = aurocOf(scores.subarray(t * n, (t + 1) * n), targets[t]);
  return { auroc, scores };
}
