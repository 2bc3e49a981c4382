/** The quick selectivity check printed by the build (the product's own scoring lives in core/score). */

/** Average ranks (1-based, ties share their mean rank) of `values`. */
export function averageRanks(values: ArrayLike<number>): Float64Array {
  const n = values.length;
  const order = Int32Array.from({ length: n }, (_, i) => i).sort((a, b) => values[a] - values[b]);
  const ranks = new Float64Array(n);
  for (let start = 0; start < n; ) {
    let end = start + 1;
    while (end < n && values[order[end]] === values[order[start]]) end++;
    const shared = (start + 1 + end) / 2; // mean of ranks start+1 .. end
    for (let k = start; k < end; k++) ranks[order[k]] = shared;
    start = end;
  }
  return ranks;
}

/** AUROC from ranks: (R₊ − n₊(n₊+1)/2) / (n₊ n₋), the Mann–Whitney U over n₊n₋ (Hanley & McNeil 1982). */
export function aurocFromRanks(ranks: Float64Array, positive: Uint8Array): number {
  let rankSum = 0;
  let positives = 0;
  for (let i = 0; i < ranks.length; i++) {
    if (positive[i]) {
      rankSum += ranks[i];
      positives++;
    }
  }
  const negatives = ranks.length - positives;
  if (positives === 0 || negatives === 0) return Number.NaN;
  return (rankSum - (positives * (positives + 1)) / 2) / (positives * negatives);
}
