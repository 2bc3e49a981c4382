/**
 * The statistics of core/score, one function each, with the source of its formula.
 * Pure functions over numbers and typed arrays; no allocation beyond their results.
 */

// Lanczos approximation with g = 7, n = 9 (Lanczos 1964); the widely used coefficient set attributed to P. Godfrey, from memory.
const LANCZOS_G = 7;
const LANCZOS_COEFFICIENTS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];
const HALF_LOG_TWO_PI = 0.5 * Math.log(2 * Math.PI);

/** ln Γ(x) for x > 0 (Lanczos 1964 approximation; reflection Γ(x)Γ(1−x) = π / sin(πx) below 0.5). */
export function lnGamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - lnGamma(1 - x);
  const z = x - 1;
  let series = LANCZOS_COEFFICIENTS[0];
  for (let i = 1; i < LANCZOS_COEFFICIENTS.length; i++) series += LANCZOS_COEFFICIENTS[i] / (z + i);
  const t = z + LANCZOS_G + 0.5;
  return HALF_LOG_TWO_PI + (z + 0.5) * Math.log(t) - t + Math.log(series);
}

/** ln C(n, k) = lnΓ(n+1) − lnΓ(k+1) − lnΓ(n−k+1) (definition of the binomial coefficient). */
export function lnChoose(n: number, k: number): number {
  if (k < 0 || k > n) return -Infinity;
  if (k === 0 || k === n) return 0;
  return lnGamma(n + 1) - lnGamma(k + 1) - lnGamma(n - k + 1);
}

/**
 * Hypergeometric upper tail P(X ≥ x), X ~ Hypergeometric(population, successes, draws)
 * (pmf C(K,k)C(N−K,n−k)/C(N,n), e.g. Johnson, Kemp & Kotz 2005 ch. 6). Terms are built by the pmf ratio
 * p(k+1)/p(k) = (K−k)(n−k) / ((k+1)(N−K−n+k+1)) in log space and summed with a running log-sum-exp.
 */
export function hypergeometricUpperTail(x: number, population: number, successes: number, draws: number): number {
  const low = Math.max(0, draws - (population - successes));
  const high = Math.min(successes, draws);
  if (x <= low) return 1;
  if (x > high) return 0;
  let logTerm = lnChoose(successes, x) + lnChoose(population - successes, draws - x) - lnChoose(population, draws);
  let maxLog = logTerm;
  let scaledSum = 1; // sum of exp(term − maxLog)
  for (let k = x; k < high; k++) {
    const ratio = ((successes - k) * (draws - k)) / ((k + 1) * (population - successes - draws + k + 1));
    logTerm += Math.log(ratio);
    if (logTerm > maxLog) {
      scaledSum = scaledSum * Math.exp(maxLog - logTerm) + 1;
      maxLog = logTerm;
    } else {
      scaledSum += Math.exp(logTerm - maxLog);
      // past the mode the terms shrink geometrically; below e^-50 of the largest they cannot move a double
      if (ratio < 1 && logTerm < maxLog - 50) break;
    }
  }
  return Math.min(1, Math.exp(maxLog + Math.log(scaledSum)));
}

/** AUROC = U / (n1·n0) with U = R1 − n1(n1+1)/2 from mid-ranks (Mann & Whitney 1947; Hanley & McNeil 1982); 0.5 when a class is empty. */
export function aurocFromRankSum(rankSumWith: number, n1: number, n0: number): number {
  if (n1 === 0 || n0 === 0) return 0.5;
  return (rankSumWith - (n1 * (n1 + 1)) / 2) / (n1 * n0);
}

/** Mean activation over probes carrying the label: Σ_{i∈P_l} a_i / n1 (arithmetic mean); NaN when n1 = 0. */
export function meanWith(sumWith: number, n1: number): number {
  return n1 === 0 ? NaN : sumWith / n1;
}

/** Mean activation over probes without the label: (Σ a − Σ_{i∈P_l} a_i) / (N − n1) (arithmetic mean); NaN when N = n1. */
export function meanWithout(sumAll: number, sumWith: number, n1: number, probeCount: number): number {
  const n0 = probeCount - n1;
  return n0 === 0 ? NaN : (sumAll - sumWith) / n0;
}

/** Top-set size max(minTopCount, ⌈topQuantile·N⌉), capped at N (top quantile as in Network Dissection, Bau et al. 2017). */
export function topSetSize(probeCount: number, topQuantile: number, minTopCount: number): number {
  return Math.min(probeCount, Math.max(minTopCount, Math.ceil(topQuantile * probeCount)));
}

/**
 * Benjamini–Hochberg q-values (Benjamini & Hochberg 1995, step-up): q_(i) = min_{j≥i} m·p_(j)/j, capped at 1,
 * returned in input order.
 */
export function benjaminiHochberg(p: Float64Array): Float64Array {
  const m = p.length;
  const order = new Int32Array(m);
  for (let i = 0; i < m; i++) order[i] = i;
  order.sort((a, b) => p[a] - p[b] || a - b);
  const q = new Float64Array(m);
  let running = 1;
  for (let r = m - 1; r >= 0; r--) {
    const i = order[r];
    const candidate = (m * p[i]) / (r + 1);
    if (candidate < running) running = candidate;
    q[i] = running;
  }
  return q;
}

/** Shares of top-activation mass: share_l = mass_l / Σ_d mass_d (our definition of a driver's share); equal shares when all masses are 0. */
export function massShares(masses: Float64Array): Float64Array {
  const shares = new Float64Array(masses.length);
  let total = 0;
  for (let i = 0; i < masses.length; i++) total += masses[i];
  for (let i = 0; i < masses.length; i++) shares[i] = total > 0 ? masses[i] / total : 1 / masses.length;
  return shares;
}

/**
 * Similarity-sensitive diversity of order q (Leinster & Cobbold 2012, eq. 1):
 * D_q = (Σ p_i (Zp)_i^{q−1})^{1/(1−q)}; q = 1: exp(−Σ p_i ln (Zp)_i); q = ∞: 1 / max_i (Zp)_i; sums over p_i > 0.
 * `similarity` is row-major k×k; an empty distribution has diversity 0 (our convention for "no driver").
 */
export function leinsterCobbold(p: Float64Array, similarity: Float64Array, order: number): number {
  const k = p.length;
  let support = 0;
  for (let i = 0; i < k; i++) if (p[i] > 0) support++;
  if (support === 0) return 0;
  let accumulator = 0; // max (Zp)_i for q = ∞, else the sum
  for (let i = 0; i < k; i++) {
    if (!(p[i] > 0)) continue;
    let zp = 0;
    for (let j = 0; j < k; j++) zp += similarity[i * k + j] * p[j];
    if (order === Infinity) accumulator = Math.max(accumulator, zp);
    else if (order === 1) accumulator += p[i] * Math.log(zp);
    else accumulator += p[i] * Math.pow(zp, order - 1);
  }
  if (order === Infinity) return 1 / accumulator;
  if (order === 1) return Math.exp(-accumulator);
  return Math.pow(accumulator, 1 / (1 - order));
}

/**
 * Class selectivity index (Morcos et al. 2018): (μ_max − μ_−max) / (μ_max + μ_−max), μ = per-label mean activation,
 * μ_−max = mean of the other labels' means; 0 when the denominator is 0 or fewer than two labels have probes.
 * Means must be non-negative (the caller shifts them); NaN entries (labels without probes) are skipped.
 */
export function classSelectivityIndex(labelMeans: Float64Array): number {
  let count = 0;
  let sum = 0;
  let maxIndex = -1;
  for (let i = 0; i < labelMeans.length; i++) {
    const mean = labelMeans[i];
    if (Number.isNaN(mean)) continue;
    count++;
    sum += mean;
    if (maxIndex < 0 || mean > labelMeans[maxIndex]) maxIndex = i;
  }
  if (count < 2) return 0;
  const top = labelMeans[maxIndex];
  const othersMean = (sum - top) / (count - 1);
  const denominator = top + othersMean;
  return denominator === 0 ? 0 : (top - othersMean) / denominator;
}

/** Intersection over union |A∩B| / (|A| + |B| − |A∩B|) (Jaccard 1912); 0 for two empty sets. */
export function intersectionOverUnion(intersection: number, sizeA: number, sizeB: number): number {
  const union = sizeA + sizeB - intersection;
  return union === 0 ? 0 : intersection / union;
}

/**
 * Normalized pointwise mutual information ln(p_ab / (p_a p_b)) / −ln p_ab (Bouma 2009), in [−1, 1]:
 * −1 when the labels never co-occur, 1 when both are on every probe.
 */
export function normalizedPmi(both: number, countA: number, countB: number, probeCount: number): number {
  if (both === 0) return -1;
  if (both === probeCount) return 1;
  const pmi = Math.log((both * probeCount) / (countA * countB));
  const value = pmi / -Math.log(both / probeCount);
  return Math.max(-1, Math.min(1, value));
}

/** Wu–Palmer similarity 2·depth(lcs) / (len(s1,lcs) + len(s2,lcs) + 2·depth(lcs)) (Wu & Palmer 1994), depth counted in nodes (root = 1). */
export function wuPalmer(lcsDepth: number, distanceA: number, distanceB: number): number {
  return (2 * lcsDepth) / (distanceA + distanceB + 2 * lcsDepth);
}

/** Our rescaling of Wu–Palmer to a relatedness: max(0, (wup − 0.5) / 0.5), so unrelated nouns (wup ≈ 0.3–0.5) map to 0. */
export function wuPalmerToRelatedness(wup: number): number {
  return Math.max(0, (wup - 0.5) / 0.5);
}

/**
 * Complementary error function erfc(x), Chebyshev fit with fractional error below 1.2e-7 everywhere
 * (Press et al., Numerical Recipes, 2nd ed., §6.2, "erfcc"; coefficients from memory, checked against scipy in the tests).
 */
export function erfc(x: number): number {
  const z = Math.abs(x);
  const t = 1 / (1 + 0.5 * z);
  const ans = t * Math.exp(-z * z - 1.26551223 + t * (1.00002368 + t * (0.37409196 + t * (0.09678418 + t * (-0.18628806 +
    t * (0.27886807 + t * (-1.13520398 + t * (1.48851587 + t * (-0.82215223 + t * 0.17087277)))))))));
  return x >= 0 ? ans : 2 - ans;
}

/** Upper tail of the standard normal, P(Z ≥ z) = erfc(z/√2)/2 (definition). */
export function normalUpperTail(z: number): number {
  return 0.5 * erfc(z / Math.SQRT2);
}

/**
 * One-sided Mann–Whitney test that the first sample is stochastically larger (Mann & Whitney 1947), normal
 * approximation with tie correction and continuity correction 0.5, as scipy.stats.mannwhitneyu(method='asymptotic',
 * alternative='greater'): σ² = n1·n0/12 · ((n+1) − Σ(t³−t)/(n(n−1))), z = (U − n1·n0/2 − 0.5)/σ.
 * `u` counts pairs the first sample wins, ties half; `tieSum` = Σ over tie groups of the pooled sample of t³ − t.
 * Returns 1 when a sample is empty or every value ties.
 */
export function mannWhitneyGreaterP(u: number, n1: number, n0: number, tieSum: number): number {
  if (n1 === 0 || n0 === 0) return 1;
  const n = n1 + n0;
  const variance = ((n1 * n0) / 12) * (n + 1 - tieSum / (n * (n - 1)));
  if (!(variance > 0)) return 1;
  const z = (u - (n1 * n0) / 2 - 0.5) / Math.sqrt(variance);
  return normalUpperTail(z);
}

/** Bin of v among `bins` equal-width bins starting at `min` (the last bin is closed on the right; numpy.histogram's convention). */
export function binOf(v: number, min: number, width: number, bins: number): number {
  if (!(width > 0)) return 0;
  const b = Math.floor((v - min) / width);
  return b < 0 ? 0 : b >= bins ? bins - 1 : b;
}

/** Pearson correlation of two equal-length samples given their means (Pearson 1895); NaN when either is constant. */
export function pearson(a: Float32Array, meanA: number, b: Float32Array, meanB: number, n: number): number {
  let sab = 0;
  let saa = 0;
  let sbb = 0;
  for (let i = 0; i < n; i++) {
    const da = a[i] - meanA;
    const db = b[i] - meanB;
    sab += da * db;
    saa += da * da;
    sbb += db * db;
  }
  return saa > 0 && sbb > 0 ? sab / Math.sqrt(saa * sbb) : NaN;
}
