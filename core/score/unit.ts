/**
 * Pass 1 of scoring: one unit's activations over the probe set → a compact UnitPartial.
 * O(N·labelsPerProbe) per unit: one radix sort of the activations, mid-ranks from tie runs, then per-label
 * rank sums (AUROC), sums (means), top-set hits and mass in single passes.
 *
 * Definitions chosen here (documented for the UI and the docs):
 * - Floor and activity: min_a is the unit's smallest activation; probe i is active when
 *   a_i > min_a + 1e-6·(1 + max(|min_a|, |max_a|)). A constant unit therefore has no active probe (it is dead).
 * - Top set M: the T = max(minTopCount, ⌈topQuantile·N⌉) highest probes, ties at the cut broken by lower probe
 *   index, without probes at the unit's floor (a probe at the floor is not a top activation; without this rule a
 *   mostly-silent unit's top set would be filled by probe order).
 * - Mass: a_i − min_a, so it is non-negative whatever the activation function.
 * - Selectivity uses per-label means shifted by −min_a when min_a < 0, so the index's non-negativity premise holds.
 */
import { SkeinError } from '../errors.ts';
import { createExplainScratch, explainTopSet, type ExplainScratch } from './explain.ts';
import { createJointScratch, emptyJoint, jointModel, type JointScratch } from './joint.ts';
import { PreparedLabels, prepareLabels } from './labels.ts';
import {
  aurocFromRankSum,
  classSelectivityIndex,
  hypergeometricUpperTail,
  meanWith,
  meanWithout,
  topSetSize,
} from './stats.ts';
import type { LabelMatrix, ScoreOptions, UnitPartial } from './types.ts';

export const defaultScoreOptions: ScoreOptions = Object.freeze({
  topQuantile: 0.005,
  minTopCount: 20,
  maxQ: 0.05,
  minAuroc: 0.75,
  diversityOrder: 1,
  deadFraction: 0.005,
  denseFraction: 0.5,
  densePreference: 0.1,
  topExamples: 24,
  polysemanticAt: 1.5,
});

function optionError(field: keyof ScoreOptions, message: string): SkeinError {
  return new SkeinError({ code: 'request', message, where: field });
}

/** Throws a SkeinError naming the first option that is out of range. */
export function validateScoreOptions(opts: ScoreOptions): void {
  const fraction = (field: keyof ScoreOptions, lowOpen: boolean) => {
    const v = opts[field];
    if (!(typeof v === 'number' && (lowOpen ? v > 0 : v >= 0) && v <= 1)) {
      throw optionError(field, `${field} must be a fraction in ${lowOpen ? '(0' : '[0'}, 1]; got ${v}.`);
    }
  };
  fraction('topQuantile', true);
  fraction('maxQ', false);
  fraction('minAuroc', false);
  fraction('deadFraction', false);
  fraction('denseFraction', false);
  if (!(opts.densePreference >= 0 && opts.densePreference <= 0.5)) {
    throw optionError('densePreference', `densePreference must be in [0, 0.5]; got ${opts.densePreference}.`);
  }
  if (!(Number.isInteger(opts.minTopCount) && opts.minTopCount >= 1)) {
    throw optionError('minTopCount', `minTopCount must be a whole number of at least 1; got ${opts.minTopCount}.`);
  }
  if (!(Number.isInteger(opts.topExamples) && opts.topExamples >= 0)) {
    throw optionError('topExamples', `topExamples must be a whole number of at least 0; got ${opts.topExamples}.`);
  }
  if (!(opts.diversityOrder >= 0)) {
    throw optionError('diversityOrder', `diversityOrder must be 0 or more (Infinity allowed); got ${opts.diversityOrder}.`);
  }
  if (!(opts.polysemanticAt > 0 && Number.isFinite(opts.polysemanticAt))) {
    throw optionError('polysemanticAt', `polysemanticAt must be a concept count above 0; got ${opts.polysemanticAt}.`);
  }
  if (opts.deadFraction > opts.denseFraction) {
    throw optionError('deadFraction', `deadFraction (${opts.deadFraction}) must not exceed denseFraction (${opts.denseFraction}).`);
  }
}

/** Radix-sort digits: 11 + 11 + 10 bits of a 32-bit key. */
const RADIX_BITS = 11;
const RADIX_BUCKETS = 1 << RADIX_BITS;

/**
 * Buffers reused across the units of one LabelMatrix (one Scratch per worker; not shareable between threads).
 * Nothing N-sized is allocated per unit.
 */
export class Scratch {
  prepared: PreparedLabels;
  order: Int32Array;          // N: probes by activation, highest first
  orderSpare: Int32Array;     // N: radix-sort ping-pong buffer
  keys: Uint32Array;          // N
  keysSpare: Uint32Array;     // N
  buckets: Int32Array;        // radix counts
  rankSum: Float64Array;      // L
  sumWith: Float64Array;      // L
  shiftedMeans: Float64Array; // L
  explain: ExplainScratch;
  joint: JointScratch;

  constructor(labels: LabelMatrix | PreparedLabels) {
    this.prepared = labels instanceof PreparedLabels ? labels : prepareLabels(labels);
    const n = this.prepared.probeCount;
    const l = this.prepared.labelTotal;
    this.order = new Int32Array(n);
    this.orderSpare = new Int32Array(n);
    this.keys = new Uint32Array(n);
    this.keysSpare = new Uint32Array(n);
    this.buckets = new Int32Array(RADIX_BUCKETS + 1);
    this.rankSum = new Float64Array(l);
    this.sumWith = new Float64Array(l);
    this.shiftedMeans = new Float64Array(l);
    this.explain = createExplainScratch(l);
    this.joint = createJointScratch(l, n);
  }
}

export function createScratch(labels: LabelMatrix | PreparedLabels): Scratch {
  return new Scratch(labels);
}

/**
 * Fills `scratch.order` with probe indices by activation, highest first, ties by lower index: each float32 becomes a
 * 32-bit key that orders descending (the usual sign-flip trick on IEEE-754 bits, complemented), then a stable
 * least-significant-digit radix sort (Knuth, TAOCP vol. 3 §5.2.5) in three passes of 11/11/10 bits.
 */
function sortDescending(values: Float32Array, scratch: Scratch): void {
  const n = values.length;
  const bits = new Uint32Array(values.buffer, values.byteOffset, n);
  let keys = scratch.keys;
  let spareKeys = scratch.keysSpare;
  // three passes (odd): start in the spare index buffer so the result lands in `order`
  let ids = scratch.orderSpare;
  let spareIds = scratch.order;
  for (let i = 0; i < n; i++) {
    const b = bits[i] === 0x80000000 ? 0 : bits[i]; // -0 sorts with +0
    const ascending = b & 0x80000000 ? ~b >>> 0 : (b | 0x80000000) >>> 0;
    keys[i] = ~ascending >>> 0;
    ids[i] = i;
  }
  const buckets = scratch.buckets;
  for (let shift = 0; shift < 32; shift += RADIX_BITS) {
    buckets.fill(0);
    for (let i = 0; i < n; i++) buckets[((keys[i] >>> shift) & (RADIX_BUCKETS - 1)) + 1]++;
    for (let d = 0; d < RADIX_BUCKETS; d++) buckets[d + 1] += buckets[d];
    for (let i = 0; i < n; i++) {
      const key = keys[i];
      const at = buckets[(key >>> shift) & (RADIX_BUCKETS - 1)]++;
      spareKeys[at] = key;
      spareIds[at] = ids[i];
    }
    [keys, spareKeys] = [spareKeys, keys];
    [ids, spareIds] = [spareIds, ids];
  }
}

/**
 * Pass 1 for one unit. `values[i]` is the unit's activation on probe i (probe order of `labels`).
 * Pass the same Scratch for every unit of a layer; a Scratch built for another LabelMatrix is rebuilt in place.
 */
export function scoreUnitPartial(
  unit: number,
  values: Float32Array,
  labels: LabelMatrix,
  opts: ScoreOptions,
  scratch?: Scratch,
): UnitPartial {
  validateScoreOptions(opts);
  const work = scratch ?? new Scratch(labels);
  if (work.prepared.matrix !== labels) {
    Object.assign(work, new Scratch(labels));
  }
  const prepared = work.prepared;
  const n = prepared.probeCount;
  const labelTotal = prepared.labelTotal;
  if (values.length !== n) {
    throw new SkeinError({
      code: 'request',
      message: `Unit ${unit} has ${values.length} activations but the probe set has ${n} probes; rescan the layer.`,
      where: `unit ${unit}`,
    });
  }

  let min = Infinity;
  let max = -Infinity;
  let sumAll = 0;
  for (let i = 0; i < n; i++) {
    const v = values[i];
    if (!Number.isFinite(v)) {
      throw new SkeinError({
        code: 'model',
        message: `Unit ${unit} has a non-finite activation (${v}) on probe ${i}; check the model and that probe's input.`,
        where: `unit ${unit}, probe ${i}`,
      });
    }
    if (v < min) min = v;
    if (v > max) max = v;
    sumAll += v;
  }
  const tolerance = 1e-6 * (1 + Math.max(Math.abs(min), Math.abs(max)));
  const floor = min + tolerance;

  sortDescending(values, work);
  const order = work.order;
  const { labelOffsets, labelIds } = labels;
  const rankSum = work.rankSum.fill(0);
  const sumWith = work.sumWith.fill(0);

  // Mid-ranks: descending positions r0..r1 of a tie run hold ascending ranks N−r1 .. N−r0, average N − (r0+r1)/2.
  let activeCount = 0;
  for (let r0 = 0; r0 < n; ) {
    const v = values[order[r0]];
    let r1 = r0;
    while (r1 + 1 < n && values[order[r1 + 1]] === v) r1++;
    const midRank = n - (r0 + r1) / 2;
    if (v > floor) activeCount += r1 - r0 + 1;
    for (let r = r0; r <= r1; r++) {
      const probe = order[r];
      for (let j = labelOffsets[probe]; j < labelOffsets[probe + 1]; j++) {
        rankSum[labelIds[j]] += midRank;
        sumWith[labelIds[j]] += v;
      }
    }
    r0 = r1 + 1;
  }

  const topTarget = topSetSize(n, opts.topQuantile, opts.minTopCount);
  const topCount = Math.min(topTarget, activeCount); // active probes come first in `order`
  const topHits = new Int32Array(labelTotal);
  const topMass = new Float64Array(labelTotal);
  for (let r = 0; r < topCount; r++) {
    const probe = order[r];
    const lifted = values[probe] - min;
    for (let j = labelOffsets[probe]; j < labelOffsets[probe + 1]; j++) {
      topHits[labelIds[j]]++;
      topMass[labelIds[j]] += lifted;
    }
  }

  const labelCount = prepared.labelCount;
  const withMeans = new Float64Array(labelTotal);
  const withoutMeans = new Float64Array(labelTotal);
  const auroc = new Float64Array(labelTotal);
  const p = new Float64Array(labelTotal);
  const shift = min < 0 ? min : 0;
  const shiftedMeans = work.shiftedMeans;
  for (let l = 0; l < labelTotal; l++) {
    const n1 = labelCount[l];
    const n0 = n - n1;
    withMeans[l] = meanWith(sumWith[l], n1);
    withoutMeans[l] = meanWithout(sumAll, sumWith[l], n1, n);
    auroc[l] = aurocFromRankSum(rankSum[l], n1, n0);
    p[l] = n1 === 0 || n0 === 0 ? 1 : hypergeometricUpperTail(topHits[l], n, n1, topCount);
    shiftedMeans[l] = withMeans[l] - shift;
  }

  const exampleCount = Math.min(opts.topExamples, activeCount);
  const topProbes = order.slice(0, exampleCount);
  const topValues = new Float32Array(exampleCount);
  for (let r = 0; r < exampleCount; r++) topValues[r] = values[topProbes[r]];

  work.explain.insidePairs.clear();
  work.explain.insideTriples.clear();
  const explanation = explainTopSet(prepared, order.subarray(0, topCount), topHits, work.explain);
  // a dead unit is never tested (see finishLayer), so its joint model is not computed
  const joint = activeCount / n < opts.deadFraction
    ? emptyJoint(labelTotal)
    : jointModel(
      { values, order, prepared, marginalAuroc: auroc, topCount, insidePairs: work.explain.insidePairs, insideTriples: work.explain.insideTriples },
      opts, work.joint,
    );

  return {
    unit,
    probeCount: n,
    min,
    max,
    mean: sumAll / n,
    activeFraction: activeCount / n,
    topThreshold: values[order[topTarget - 1]],
    topCount,
    selectivity: classSelectivityIndex(shiftedMeans),
    labelCount,
    meanWith: withMeans,
    meanWithout: withoutMeans,
    auroc,
    topHits,
    p,
    topMass,
    topProbes,
    topValues,
    explanation,
    joint,
  };
}
