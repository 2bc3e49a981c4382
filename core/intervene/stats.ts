/** The statistics of an ablation's cost: each one function with its source. */
import { lnGamma } from '../score/stats.ts';
import type { Rng } from '../random.ts';

/** Regularized incomplete beta I_x(a, b) by Lentz's continued fraction (Press et al., Numerical Recipes 3rd ed. §6.4). */
export function regularizedBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(lnGamma(a + b) - lnGamma(a) - lnGamma(b) + a * Math.log(x) + b * Math.log(1 - x));
  // The fraction converges fast for x < (a+1)/(a+b+2); use the symmetry I_x(a,b) = 1 − I_{1−x}(b,a) otherwise.
  if (x > (a + 1) / (a + b + 2)) return 1 - (front * betaFraction(1 - x, b, a)) / b;
  return (front * betaFraction(x, a, b)) / a;
}

function betaFraction(x: number, a: number, b: number): number {
  const tiny = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d; h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d; if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c; if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** P(T > t) for Student's t with df degrees of freedom: ½·I_{df/(df+t²)}(df/2, ½) for t ≥ 0 (Abramowitz & Stegun 26.7.1 via 26.5.27). */
export function studentTUpperTail(t: number, df: number): number {
  if (Number.isNaN(t)) return NaN;
  if (t === Infinity) return 0;
  if (t === -Infinity) return 1;
  const tail = 0.5 * regularizedBeta(df / (df + t * t), df / 2, 0.5);
  return t >= 0 ? tail : 1 - tail;
}

/**
 * One-sided one-sample t-test of mean > floor (Student 1908): t = (x̄ − floor)/(s/√n), df = n − 1.
 * n < 2 gives 1 (no evidence); s = 0 gives 0 when x̄ > floor, else 1.
 */
export function meanAboveFloorP(mean: number, sd: number, n: number, floor: number): number {
  if (n < 2) return 1;
  if (sd === 0) return mean > floor ? 0 : 1;
  return studentTUpperTail((mean - floor) / (sd / Math.sqrt(n)), n - 1);
}

/**
 * Percentile bootstrap interval of a mean (Efron & Tibshirani 1993, ch. 13): resample the n values with
 * replacement `reps` times, take the (α/2, 1 − α/2) quantiles of the resampled means. `values` is read at
 * `index[0..n)`; `scratch` holds reps doubles. Values all equal: the interval is that value.
 */
export function bootstrapMeanInterval(
  values: Float64Array, index: Int32Array, n: number, reps: number, rng: Rng, alpha: number, scratch: Float64Array,
): [number, number] {
  if (n === 0) return [NaN, NaN];
  let lo = Infinity;
  let hi = -Infinity;
  for (let k = 0; k < n; k++) { const v = values[index[k]]; if (v < lo) lo = v; if (v > hi) hi = v; }
  if (lo === hi) return [lo, hi];
  for (let r = 0; r < reps; r++) {
    let s = 0;
    for (let k = 0; k < n; k++) s += values[index[(rng() * n) | 0]];
    scratch[r] = s / n;
  }
  const sorted = scratch.subarray(0, reps).sort();
  return [quantileSorted(sorted, alpha / 2), quantileSorted(sorted, 1 - alpha / 2)];
}

/** Linear-interpolation quantile of sorted values (Hyndman & Fan 1996, definition 7; numpy's default). */
export function quantileSorted(sorted: Float64Array, q: number): number {
  const pos = (sorted.length - 1) * q;
  const i = Math.floor(pos);
  const f = pos - i;
  return i + 1 < sorted.length ? sorted[i] * (1 - f) + sorted[i + 1] * f : sorted[i];
}

/**
 * One-sided Welch test of mean₁ − mean₀ > floor (Welch 1947; Welch–Satterthwaite degrees of freedom).
 * Fewer than two values on a side gives 1; no spread on either side gives 0 when the difference exceeds floor, else 1.
 */
export function welchAboveP(mean1: number, var1: number, n1: number, mean0: number, var0: number, n0: number, floor: number): number {
  if (n1 < 2 || n0 < 2) return 1;
  const a = var1 / n1;
  const b = var0 / n0;
  const diff = mean1 - mean0 - floor;
  if (a + b === 0) return diff > 0 ? 0 : 1;
  const df = (a + b) ** 2 / ((a * a) / (n1 - 1) + (b * b) / (n0 - 1));
  return studentTUpperTail(diff / Math.sqrt(a + b), df);
}
