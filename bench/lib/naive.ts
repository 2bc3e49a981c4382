/**
 * The straightforward way to compute a unit's per-label statistics, as a yardstick for core/score's design:
 * for every unit and label, a full comparison sort of the unit's activations, mid-ranks and rank sum from that
 * sort, the top set from that sort, means by direct loops, and the hypergeometric tail by summing every term.
 * It implements the same definitions as core/score/unit.ts (top set, floor, ties), so the numbers must agree.
 */
import { lnChoose, topSetSize, type LabelMatrix, type ScoreOptions } from '../../core/score/index.ts';

export interface NaiveUnit {
  auroc: Float64Array;
  meanWith: Float64Array;
  meanWithout: Float64Array;
  topHits: Int32Array;
  p: Float64Array;
}

/** One 0/1 row per label: probe i carries label l. */
export function labelMembership(labels: LabelMatrix): Uint8Array[] {
  const rows = labels.labels.map(() => new Uint8Array(labels.count));
  for (let p = 0; p < labels.count; p++) {
    for (let k = labels.labelOffsets[p]; k < labels.labelOffsets[p + 1]; k++) rows[labels.labelIds[k]][p] = 1;
  }
  return rows;
}

/**
 * P(X ≥ x) for X ~ Hypergeometric(population, successes, draws) by summing every pmf term
 * C(K,k)C(N−K,n−k)/C(N,n) for k = x..min(K,n) (Johnson, Kemp & Kotz 2005 ch. 6), each from lnChoose, in log-sum-exp.
 */
export function hypergeometricTailFullSum(x: number, population: number, successes: number, draws: number): number {
  const low = Math.max(0, draws - (population - successes));
  const high = Math.min(successes, draws);
  if (x <= low) return 1;
  if (x > high) return 0;
  const logTotal = lnChoose(population, draws);
  const terms: number[] = [];
  for (let k = x; k <= high; k++) terms.push(lnChoose(successes, k) + lnChoose(population - successes, draws - k) - logTotal);
  const maxLog = Math.max(...terms);
  let sum = 0;
  for (const t of terms) sum += Math.exp(t - maxLog);
  return Math.min(1, Math.exp(maxLog + Math.log(sum)));
}

export function naiveUnit(values: Float32Array, membership: Uint8Array[], opts: ScoreOptions): NaiveUnit {
  const n = values.length;
  const labelTotal = membership.length;
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < n; i++) {
    if (values[i] < min) min = values[i];
    if (values[i] > max) max = values[i];
  }
  const floor = min + 1e-6 * (1 + Math.max(Math.abs(min), Math.abs(max)));
  let active = 0;
  for (let i = 0; i < n; i++) if (values[i] > floor) active++;
  const topCount = Math.min(topSetSize(n, opts.topQuantile, opts.minTopCount), active);
  const out: NaiveUnit = {
    auroc: new Float64Array(labelTotal), meanWith: new Float64Array(labelTotal), meanWithout: new Float64Array(labelTotal),
    topHits: new Int32Array(labelTotal), p: new Float64Array(labelTotal),
  };
  for (let l = 0; l < labelTotal; l++) {
    const has = membership[l];
    const order = Array.from({ length: n }, (_, i) => i);
    order.sort((a, b) => values[b] - values[a] || a - b);
    let rankSum = 0;
    let n1 = 0;
    let sumWith = 0;
    let sumWithout = 0;
    for (let r0 = 0; r0 < n; ) {
      let r1 = r0;
      while (r1 + 1 < n && values[order[r1 + 1]] === values[order[r0]]) r1++;
      const midRank = n - (r0 + r1) / 2;
      for (let r = r0; r <= r1; r++) if (has[order[r]]) rankSum += midRank;
      r0 = r1 + 1;
    }
    for (let i = 0; i < n; i++) {
      if (has[i]) { n1++; sumWith += values[i]; } else sumWithout += values[i];
    }
    let hits = 0;
    for (let r = 0; r < topCount; r++) if (has[order[r]]) hits++;
    const n0 = n - n1;
    out.auroc[l] = n1 === 0 || n0 === 0 ? 0.5 : (rankSum - (n1 * (n1 + 1)) / 2) / (n1 * n0); // Mann & Whitney 1947
    out.meanWith[l] = n1 === 0 ? NaN : sumWith / n1;
    out.meanWithout[l] = n0 === 0 ? NaN : sumWithout / n0;
    out.topHits[l] = hits;
    out.p[l] = n1 === 0 || n0 === 0 ? 1 : hypergeometricTailFullSum(hits, n, n1, topCount);
  }
  return out;
}
