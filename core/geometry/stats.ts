/**
 * The geometry statistics of one layer, each one function on typed arrays with its source in a one-line comment.
 * Directions are row-major Float64Array [concepts × units].
 */
import { aurocFromRankSum } from '../score/stats.ts';

/** Euclidean norm of row i of a row-major [rows × width] matrix. */
export function rowNorm(rows: Float64Array, width: number, i: number): number {
  let s = 0;
  for (let u = 0; u < width; u++) s += rows[i * width + u] ** 2;
  return Math.sqrt(s);
}

function rowDot(rows: Float64Array, width: number, i: number, j: number): number {
  let s = 0;
  for (let u = 0; u < width; u++) s += rows[i * width + u] * rows[j * width + u];
  return s;
}

/** Cosine similarity matrix cos(w_i, w_j) = w_i·w_j / (‖w_i‖‖w_j‖) (definition); 0 where a direction is zero. */
export function cosineMatrix(dirs: Float64Array, count: number, width: number): Float64Array {
  const norms = Float64Array.from({ length: count }, (_, i) => rowNorm(dirs, width, i));
  const out = new Float64Array(count * count);
  for (let i = 0; i < count; i++) {
    for (let j = i; j < count; j++) {
      const c = norms[i] > 0 && norms[j] > 0 ? rowDot(dirs, width, i, j) / (norms[i] * norms[j]) : 0;
      out[i * count + j] = c;
      out[j * count + i] = c;
    }
  }
  return out;
}

/** Total interference of concept i: Σ_{j≠i} (ŵ_i·w_j)² (Elhage et al. 2022, "Toy Models of Superposition", the superposition term). */
export function totalInterference(dirs: Float64Array, count: number, width: number): Float64Array {
  const out = new Float64Array(count);
  for (let i = 0; i < count; i++) {
    const ni = rowNorm(dirs, width, i);
    if (ni === 0) continue;
    let s = 0;
    for (let j = 0; j < count; j++) if (j !== i) s += (rowDot(dirs, width, i, j) / ni) ** 2;
    out[i] = s;
  }
  return out;
}

/** Feature dimensionality D_i = ‖W_i‖² / Σ_j (Ŵ_i·W_j)² (Elhage et al. 2022, "Feature dimensionality"); 0 for a zero direction. */
export function featureDimensionality(dirs: Float64Array, count: number, width: number): Float64Array {
  const out = new Float64Array(count);
  for (let i = 0; i < count; i++) {
    const ni = rowNorm(dirs, width, i);
    if (ni === 0) continue;
    let denominator = 0;
    for (let j = 0; j < count; j++) denominator += (rowDot(dirs, width, i, j) / ni) ** 2;
    out[i] = (ni * ni) / denominator;
  }
  return out;
}

/**
 * Participation ratio (Σλ)² / Σλ² of a symmetric covariance's eigenvalues (Gao et al. 2017, "A theory of
 * multineuronal dimensionality"), computed without an eigendecomposition: Σλ = tr C and Σλ² = tr C² = ‖C‖_F².
 */
export function participationRatio(cov: Float64Array, width: number): number {
  let trace = 0;
  let frob = 0;
  for (let i = 0; i < width; i++) trace += cov[i * width + i];
  for (let k = 0; k < width * width; k++) frob += cov[k] * cov[k];
  return frob > 0 ? (trace * trace) / frob : 0;
}

/**
 * AUROC of scores against binary labels over the probes listed in `rows` (all probes when omitted): mid-ranks
 * with ties counted half, U / (n1·n0) (Mann & Whitney 1947; Hanley & McNeil 1982).
 */
export function aurocOf(scores: ArrayLike<number>, positive: Uint8Array, rows?: Int32Array): number {
  const n = rows ? rows.length : scores.length;
  const idx = new Int32Array(n);
  const val = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const p = rows ? rows[k] : k;
    idx[k] = p;
    val[k] = scores[p];
  }
  const order = Int32Array.from({ length: n }, (_, k) => k).sort((a, b) => val[a] - val[b]);
  let rankSum = 0;
  let n1 = 0;
  for (let start = 0; start < n;) {
    let end = start + 1;
    while (end < n && val[order[end]] === val[order[start]]) end++;
    const midRank = (start + 1 + end) / 2;
    for (let k = start; k < end; k++) if (positive[idx[order[k]]]) { rankSum += midRank; n1++; }
    start = end;
  }
  return aurocFromRankSum(rankSum, n1, n - n1);
}

/**
 * Order of a symmetric similarity matrix's rows for display: average-linkage agglomerative clustering on
 * 1 − |cos| (Sokal & Michener 1958, UPGMA), leaves read left to right.
 */
export function clusterOrder(sim: Float64Array, count: number): number[] {
  if (count <= 2) return Array.from({ length: count }, (_, i) => i);
  let clusters: { members: number[] }[] = Array.from({ length: count }, (_, i) => ({ members: [i] }));
  const distance = (a: number[], b: number[]) => {
    let s = 0;
    for (const i of a) for (const j of b) s += 1 - Math.abs(sim[i * count + j]);
    return s / (a.length * b.length);
  };
  while (clusters.length > 1) {
    let best = [0, 1];
    let bestD = Infinity;
    for (let a = 0; a < clusters.length; a++) {
      for (let b = a + 1; b < clusters.length; b++) {
        const d = distance(clusters[a].members, clusters[b].members);
        if (d < bestD - 1e-12) { bestD = d; best = [a, b]; }
      }
    }
    const merged = { members: [...clusters[best[0]].members, ...clusters[best[1]].members] };
    clusters = clusters.filter((_, k) => k !== best[0] && k !== best[1]);
    clusters.splice(best[0], 0, merged);
  }
  return clusters[0].members;
}

/**
 * An honest 2-D picture of directions: their projection onto the top two principal axes of the directions
 * themselves (W = U S Vᵀ; row i lands at (U_i1 S_1, U_i2 S_2) = (w_i·v_1, w_i·v_2)), from the small concepts ×
 * concepts matrix W Wᵀ by power iteration with deflation (Golub & Van Loan, "Matrix Computations", §7.3, §8.2),
 * and the share of the directions' squared norm the picture keeps, (S_1² + S_2²) / Σ S².
 */
export function projectDirections(dirs: Float64Array, count: number, width: number, random: () => number): { xy: Float64Array; kept: number } {
  const gram = new Float64Array(count * count);
  for (let i = 0; i < count; i++) for (let j = i; j < count; j++) gram[i * count + j] = gram[j * count + i] = rowDot(dirs, width, i, j);
  let total = 0;
  for (let i = 0; i < count; i++) total += gram[i * count + i];
  const xy = new Float64Array(count * 2);
  const found: Float64Array[] = [];
  let kept = 0;
  for (let k = 0; k < Math.min(2, count, width); k++) {
    let v: Float64Array = Float64Array.from({ length: count }, () => random() - 0.5);
    let lambda = 0;
    for (let it = 0; it < 1000; it++) {
      const next = new Float64Array(count);
      for (let a = 0; a < count; a++) {
        let s = 0;
        for (let b = 0; b < count; b++) s += gram[a * count + b] * v[b];
        next[a] = s;
      }
      for (const prev of found) {
        let d = 0;
        for (let a = 0; a < count; a++) d += next[a] * prev[a];
        for (let a = 0; a < count; a++) next[a] -= d * prev[a];
      }
      let norm = 0;
      for (let a = 0; a < count; a++) norm += next[a] * next[a];
      norm = Math.sqrt(norm);
      if (norm === 0) break;
      let change = 0;
      for (let a = 0; a < count; a++) {
        next[a] /= norm;
        change = Math.max(change, Math.abs(next[a] - v[a]));
      }
      v = next;
      lambda = norm;
      if (change < 1e-12) break;
    }
    found.push(v);
    kept += lambda;
    const singular = Math.sqrt(lambda);
    // Sign convention: the largest coordinate is positive, so repeated runs draw the same picture.
    let big = 0;
    for (let a = 0; a < count; a++) if (Math.abs(v[a]) > Math.abs(v[big])) big = a;
    const sign = v[big] < 0 ? -1 : 1;
    for (let i = 0; i < count; i++) xy[i * 2 + k] = sign * v[i] * singular;
  }
  return { xy, kept: total > 0 ? Math.min(1, kept / total) : 0 };
}
