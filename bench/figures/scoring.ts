/**
 * Scoring: every statistic for N probes × U units × L labels.
 *  - kernel: core/score pass 1 (scoreUnitPartial with one shared Scratch) over every unit, pass 2 (finishLayer:
 *    BH across the layer, drivers, concept count) and the ranking, on activations generated in memory;
 *  - per-unit cost as core/score/job.ts calls pass 1 today (no Scratch passed: one is built per unit);
 *  - the straightforward yardstick (bench/lib/naive.ts: a full comparison sort per unit and label) on the first
 *    units, with the same units timed through the kernel side by side, and every number compared.
 */
import {
  buildRelatedness, createScratch, defaultScoreOptions, finishLayer, rankUnits, scoreUnitPartial,
  type UnitPartial,
} from '../../core/score/index.ts';
import { labelMembership, naiveUnit } from '../lib/naive.ts';
import { SyntheticActivations, type SyntheticSpec } from '../lib/synthetic.ts';
import { median, seconds } from '../lib/measure.ts';

export interface Agreement {
  units: number;
  cells: number;
  maxAurocDiff: number;
  maxMeanRelDiff: number;
  topHitMismatches: number;
  maxPRelDiff: number;
  pCompared: number;
}

/** Largest differences allowed between the kernel and the yardstick (the numbers must not change). */
export const AGREEMENT_BOUNDS = {
  // both are exact rank sums over the same mid-ranks; only summation order differs
  auroc: 1e-12,
  // float64 sums of the same float32 values in another order
  meanRelative: 1e-9,
  // the kernel's tail stops once terms fall below e^-50 of the largest, and builds terms by the pmf ratio instead
  // of one lnChoose each: both move p by far less than this
  pRelative: 1e-6,
} as const;

/**
 * Pass 1 with the joint model skipped: every unit counts as dead for it (deadFraction = 1), which leaves exactly the
 * marginal statistics the kernel computed before the joint model (AUROC, means, enrichment, top-set formula).
 */
const MARGINAL_ONLY = { ...defaultScoreOptions, deadFraction: 1, denseFraction: 1 };

export interface ScoringFigure {
  spec: SyntheticSpec;
  reps: number;
  pass1Seconds: number[];
  pass2Seconds: number[];
  rankSeconds: number[];
  kernelSeconds: number;
  /** pass 1 with the joint model skipped (the kernel before it), timed on the same units interleaved */
  marginalSeconds: number[];
  /** kernel (pass 1 + pass 2 with BH, bootstrap, ranking) / pass 1 without the joint model */
  jointOverMarginal: number;
  unitProbesPerSecond: number;
  sampleUnits: number;
  sampleKernelSeconds: number;
  sampleNoScratchSeconds: number;
  sampleNaiveSeconds: number;
  naiveSpeedup: number;
  noScratchSlowdown: number;
  naiveExtrapolatedSeconds: number;
  noScratchExtrapolatedSeconds: number;
  agreement: Agreement;
}

function relDiff(a: number, b: number): number {
  if (a === b) return 0;
  if (Number.isNaN(a) && Number.isNaN(b)) return 0;
  return Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b));
}

export function compareWithNaive(partial: UnitPartial, naive: ReturnType<typeof naiveUnit>, into: Agreement): void {
  into.units++;
  for (let l = 0; l < partial.auroc.length; l++) {
    into.cells++;
    into.maxAurocDiff = Math.max(into.maxAurocDiff, Math.abs(partial.auroc[l] - naive.auroc[l]));
    into.maxMeanRelDiff = Math.max(into.maxMeanRelDiff, relDiff(partial.meanWith[l], naive.meanWith[l]), relDiff(partial.meanWithout[l], naive.meanWithout[l]));
    if (partial.topHits[l] !== naive.topHits[l]) into.topHitMismatches++;
    // below 1e-300 both have underflowed in their last steps; only the order of magnitude is meaningful there
    if (partial.p[l] >= 1e-300 || naive.p[l] >= 1e-300) {
      into.pCompared++;
      into.maxPRelDiff = Math.max(into.maxPRelDiff, relDiff(partial.p[l], naive.p[l]));
    }
  }
}

export function checkAgreement(a: Agreement, what: string): void {
  const bad: string[] = [];
  if (!(a.maxAurocDiff <= AGREEMENT_BOUNDS.auroc)) bad.push(`AUROC differs by ${a.maxAurocDiff}`);
  if (!(a.maxMeanRelDiff <= AGREEMENT_BOUNDS.meanRelative)) bad.push(`means differ by ${a.maxMeanRelDiff} (relative)`);
  if (a.topHitMismatches > 0) bad.push(`${a.topHitMismatches} top-set hit counts differ`);
  if (!(a.maxPRelDiff <= AGREEMENT_BOUNDS.pRelative)) bad.push(`p differs by ${a.maxPRelDiff} (relative)`);
  if (bad.length) throw new Error(`${what}: the kernel and the straightforward computation disagree: ${bad.join('; ')}`);
}

export function emptyAgreement(): Agreement {
  return { units: 0, cells: 0, maxAurocDiff: 0, maxMeanRelDiff: 0, topHitMismatches: 0, maxPRelDiff: 0, pCompared: 0 };
}

export function scoringFigure(spec: SyntheticSpec, reps: number, sampleUnits: number, log: (s: string) => void): ScoringFigure {
  const source = new SyntheticActivations(spec);
  const labels = source.labels;
  const opts = defaultScoreOptions;
  const relatedness = buildRelatedness(labels.labels, labels, null, null, { wordnet: false });
  const values = new Float32Array(spec.probes);
  const pass1Seconds: number[] = [];
  const pass2Seconds: number[] = [];
  const rankSeconds: number[] = [];
  const marginalSeconds: number[] = [];
  for (let rep = 0; rep < reps; rep++) {
    const scratch = createScratch(labels);
    const partials: UnitPartial[] = [];
    let pass1 = 0;
    let marginal = 0;
    for (let u = 0; u < spec.units; u++) {
      source.fill(u, values); // generating the activations is not timed
      let t = process.hrtime.bigint();
      partials.push(scoreUnitPartial(u, values, labels, opts, scratch));
      pass1 += seconds(t);
      // side by side, the same unit: pass 1 without the joint model (the kernel before it: marginal statistics only)
      t = process.hrtime.bigint();
      scoreUnitPartial(u, values, labels, MARGINAL_ONLY, scratch);
      marginal += seconds(t);
    }
    marginalSeconds.push(marginal);
    let t = process.hrtime.bigint();
    const scores = finishLayer(partials, relatedness, opts);
    pass2Seconds.push(seconds(t));
    t = process.hrtime.bigint();
    rankUnits(scores.map((score) => ({ score })));
    rankSeconds.push(seconds(t));
    pass1Seconds.push(pass1);
    log(`  scoring rep ${rep + 1}/${reps}: pass 1 ${pass1.toFixed(2)} s (without the joint model ${marginal.toFixed(2)} s), pass 2 ${pass2Seconds[rep].toFixed(2)} s, rank ${rankSeconds[rep].toFixed(3)} s`);
  }
  const kernelSeconds = median(pass1Seconds) + median(pass2Seconds) + median(rankSeconds);

  // side by side on the same units: kernel (shared Scratch), kernel as the job calls it, straightforward
  const membership = labelMembership(labels);
  const agreement = emptyAgreement();
  let sampleKernel = 0;
  let sampleNoScratch = 0;
  let sampleNaive = 0;
  const scratch = createScratch(labels);
  for (let u = 0; u < sampleUnits; u++) {
    source.fill(u, values);
    let t = process.hrtime.bigint();
    const partial = scoreUnitPartial(u, values, labels, opts, scratch);
    sampleKernel += seconds(t);
    t = process.hrtime.bigint();
    scoreUnitPartial(u, values, labels, opts);
    sampleNoScratch += seconds(t);
    t = process.hrtime.bigint();
    const naive = naiveUnit(values, membership, opts);
    sampleNaive += seconds(t);
    compareWithNaive(partial, naive, agreement);
  }
  checkAgreement(agreement, `scoring ${spec.probes}×${spec.units}×${spec.labels}`);
  const perUnitKernel = sampleKernel / sampleUnits;
  return {
    spec, reps, pass1Seconds, pass2Seconds, rankSeconds, kernelSeconds, marginalSeconds,
    jointOverMarginal: kernelSeconds / median(marginalSeconds),
    unitProbesPerSecond: (spec.units * spec.probes) / kernelSeconds,
    sampleUnits, sampleKernelSeconds: sampleKernel, sampleNoScratchSeconds: sampleNoScratch, sampleNaiveSeconds: sampleNaive,
    naiveSpeedup: sampleNaive / sampleKernel, noScratchSlowdown: sampleNoScratch / sampleKernel,
    naiveExtrapolatedSeconds: (sampleNaive / sampleUnits) * spec.units + median(pass2Seconds),
    noScratchExtrapolatedSeconds: (sampleNoScratch / sampleUnits) * spec.units + median(pass2Seconds),
    agreement,
  };
  void perUnitKernel;
}

/**
 * The same comparison at a larger N (smaller p-values, longer hypergeometric tails): the first `units` units of
 * `spec`, kernel against the straightforward computation; throws when a bound is exceeded.
 */
export function agreementAtScale(spec: SyntheticSpec, units: number): Agreement {
  const source = new SyntheticActivations({ ...spec, units });
  const labels = source.labels;
  const membership = labelMembership(labels);
  const scratch = createScratch(labels);
  const values = new Float32Array(spec.probes);
  const agreement = emptyAgreement();
  for (let u = 0; u < units; u++) {
    source.fill(u, values);
    compareWithNaive(scoreUnitPartial(u, values, labels, defaultScoreOptions, scratch), naiveUnit(values, membership, defaultScoreOptions), agreement);
  }
  checkAgreement(agreement, `scoring ${spec.probes}×${units}×${spec.labels}`);
  return agreement;
}
