/**
 * How one unit responds to each of its drivers, apart and together: the evidence the unit page leads with.
 * Given the unit's activations and, per driver, which probes carry it (a compound driver: all of its parts), every
 * probe falls in one of: no driver; exactly one driver ("alone"); two or more ("with others"). Pure, typed arrays.
 */

/** Probes of one group: how many, and their mean activation (null when the group is empty). */
export interface ResponseGroup { n: number; mean: number | null }

export interface DriverResponse {
  /** Probes carrying this driver and none of the unit's other drivers. */
  alone: ResponseGroup;
  /** Probes carrying this driver and at least one other. */
  withOthers: ResponseGroup;
  /** mean(alone) − mean(none); null when either group is empty. */
  effectAlone: number | null;
  /** mean(with others) − mean(none); null when either group is empty. */
  effectWithOthers: number | null;
  /** P(a probe of "alone" activates the unit more than one of "none"), ties counted half; null when either is empty. */
  aboveNoneAlone: number | null;
  aboveNoneWithOthers: number | null;
  /** Probe indices of "alone", highest activation first (at most `examples`). */
  examples: number[];
}

export interface ResponseTable {
  probes: number;
  /** Probes carrying none of the drivers. */
  none: ResponseGroup;
  all: ResponseGroup;
  drivers: DriverResponse[];
  /** Probe indices of "none", highest activation first: what else the unit fires on. */
  noneExamples: number[];
}

/** Presence of a driver per probe: 1 where every one of its parts' probe lists holds the probe (AND of the parts). */
export function driverPresence(probeCount: number, partProbes: ArrayLike<number>[]): Uint8Array {
  const hits = new Uint8Array(probeCount);
  for (const probes of partProbes) for (let i = 0; i < probes.length; i++) hits[probes[i]]++;
  const present = new Uint8Array(probeCount);
  if (partProbes.length === 0) return present;
  for (let p = 0; p < probeCount; p++) present[p] = hits[p] === partProbes.length ? 1 : 0;
  return present;
}

function group(n: number, sum: number): ResponseGroup {
  return { n, mean: n > 0 ? sum / n : null };
}

function difference(a: ResponseGroup, b: ResponseGroup): number | null {
  return a.mean === null || b.mean === null ? null : a.mean - b.mean;
}

/**
 * The response table of one unit. `presence[d][p]` is 1 when probe p carries driver d. Effects are differences in
 * mean activation against the probes with no driver; "above none" is the Mann–Whitney U of the group against
 * "none" divided by n_group·n_none (the common-language effect size, McGraw & Wong 1992; ties count half),
 * from one sort of the unit's activations.
 */
export function responseTable(values: Float32Array, presence: Uint8Array[], opts: { examples?: number } = {}): ResponseTable {
  const n = values.length;
  const k = presence.length;
  const wanted = opts.examples ?? 8;
  for (const p of presence) if (p.length !== n) throw new RangeError(`presence has ${p.length} probes, values ${n}`);
  // Per probe: how many drivers it carries, and which one when exactly one.
  const carried = new Uint8Array(n);
  const only = new Int32Array(n).fill(-1);
  for (let d = 0; d < k; d++) {
    const pres = presence[d];
    for (let p = 0; p < n; p++) if (pres[p]) { carried[p]++; only[p] = d; }
  }
  const aloneN = new Float64Array(k), aloneSum = new Float64Array(k), withN = new Float64Array(k), withSum = new Float64Array(k);
  let noneN = 0, noneSum = 0, allSum = 0;
  for (let p = 0; p < n; p++) {
    const v = values[p];
    allSum += v;
    if (carried[p] === 0) { noneN++; noneSum += v; }
    else if (carried[p] === 1) { aloneN[only[p]]++; aloneSum[only[p]] += v; }
    else for (let d = 0; d < k; d++) if (presence[d][p]) { withN[d]++; withSum[d] += v; }
  }

  // One ascending sort; walking tie blocks gives each group's U against "none" and each group's highest probes.
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  order.sort((a, b) => values[a] - values[b] || a - b);
  const uAlone = new Float64Array(k), uWith = new Float64Array(k);
  const blockAlone = new Float64Array(k), blockWith = new Float64Array(k);
  let noneBelow = 0;
  for (let start = 0; start < n;) {
    let end = start + 1;
    while (end < n && values[order[end]] === values[order[start]]) end++;
    let blockNone = 0;
    blockAlone.fill(0);
    blockWith.fill(0);
    for (let i = start; i < end; i++) {
      const p = order[i];
      if (carried[p] === 0) blockNone++;
      else if (carried[p] === 1) blockAlone[only[p]]++;
      else for (let d = 0; d < k; d++) if (presence[d][p]) blockWith[d]++;
    }
    for (let d = 0; d < k; d++) {
      uAlone[d] += blockAlone[d] * (noneBelow + 0.5 * blockNone);
      uWith[d] += blockWith[d] * (noneBelow + 0.5 * blockNone);
    }
    noneBelow += blockNone;
    start = end;
  }
  const examples: number[][] = Array.from({ length: k }, () => []);
  const noneExamples: number[] = [];
  let missing = k;
  for (let i = n - 1; i >= 0 && (missing > 0 || noneExamples.length < wanted); i--) {
    const p = order[i];
    if (carried[p] === 0) { if (noneExamples.length < wanted) noneExamples.push(p); }
    else if (carried[p] === 1 && examples[only[p]].length < wanted) {
      examples[only[p]].push(p);
      if (examples[only[p]].length === wanted) missing--;
    }
  }

  const none = group(noneN, noneSum);
  const above = (u: number, m: number) => (m > 0 && noneN > 0 ? u / (m * noneN) : null);
  return {
    probes: n, none, all: group(n, allSum), noneExamples,
    drivers: Array.from({ length: k }, (_, d) => {
      const alone = group(aloneN[d], aloneSum[d]);
      const withOthers = group(withN[d], withSum[d]);
      return {
        alone, withOthers, effectAlone: difference(alone, none), effectWithOthers: difference(withOthers, none),
        aboveNoneAlone: above(uAlone[d], aloneN[d]), aboveNoneWithOthers: above(uWith[d], withN[d]), examples: examples[d],
      };
    }),
  };
}
