/**
 * Pass 2 of scoring: the layer's UnitPartials → UnitScores (BH across the layer, flags, drivers, shares,
 * concept count), and the ranking across layers.
 */
import { SkeinError } from '../errors.ts';
import { gaussian, mulberry32 } from '../random.ts';
import { benjaminiHochberg, leinsterCobbold, massShares } from './stats.ts';
import { validateScoreOptions } from './unit.ts';
import type { Driver, JointTerm, LabelStat, Modulator, Relatedness, ScoreOptions, UnitFormula, UnitPartial, UnitScore } from './types.ts';

/** Smallest q used in the evidence sum, so a q that underflowed to 0 adds 300, not Infinity (our cap). */
const MIN_Q_FOR_EVIDENCE = 1e-300;

function isTestable(partial: UnitPartial, label: number): boolean {
  const n1 = partial.labelCount[label];
  return n1 > 0 && n1 < partial.probeCount;
}

/** Dead: active on fewer than deadFraction of the probes (activity as defined in core/score/unit.ts). */
export function isDead(partial: UnitPartial, opts: ScoreOptions): boolean {
  return partial.activeFraction < opts.deadFraction;
}

/** Dense: active on at least denseFraction of the probes and no testable label with |AUROC − 0.5| ≥ densePreference. */
export function isDense(partial: UnitPartial, opts: ScoreOptions): boolean {
  if (partial.activeFraction < opts.denseFraction) return false;
  for (let l = 0; l < partial.auroc.length; l++) {
    if (isTestable(partial, l) && Math.abs(partial.auroc[l] - 0.5) >= opts.densePreference) return false;
  }
  return true;
}

/**
 * BH q-values across every test the joint model ran on the layer's units that are not dead (a dead unit is not
 * tested and cannot have drivers). Returns each unit's q per test, in the order of partial.joint.tests.
 */
function layerQValues(partials: UnitPartial[], dead: boolean[]): Float64Array[] {
  let testCount = 0;
  partials.forEach((partial, u) => { if (!dead[u]) testCount += partial.joint.tests.length; });
  const pooled = new Float64Array(testCount);
  let t = 0;
  partials.forEach((partial, u) => {
    if (dead[u]) return;
    pooled.set(partial.joint.tests, t);
    t += partial.joint.tests.length;
  });
  const pooledQ = benjaminiHochberg(pooled);
  t = 0;
  return partials.map((partial, u) => {
    if (dead[u]) return new Float64Array(partial.joint.tests.length).fill(1);
    const q = pooledQ.slice(t, t + partial.joint.tests.length);
    t += partial.joint.tests.length;
    return q;
  });
}

/** Benjamini–Hochberg q of the marginal enrichment tests (Network Dissection's statistic, reported, not a gate). */
function enrichmentQValues(partials: UnitPartial[], dead: boolean[]): Float64Array[] {
  let testCount = 0;
  partials.forEach((partial, u) => {
    if (dead[u]) return;
    for (let l = 0; l < partial.p.length; l++) if (isTestable(partial, l)) testCount++;
  });
  const pooled = new Float64Array(testCount);
  let t = 0;
  partials.forEach((partial, u) => {
    if (dead[u]) return;
    for (let l = 0; l < partial.p.length; l++) if (isTestable(partial, l)) pooled[t++] = partial.p[l];
  });
  const pooledQ = benjaminiHochberg(pooled);
  t = 0;
  return partials.map((partial, u) => {
    const q = new Float64Array(partial.p.length).fill(1);
    if (dead[u]) return q;
    for (let l = 0; l < partial.p.length; l++) if (isTestable(partial, l)) q[l] = pooledQ[t++];
    return q;
  });
}

/** Bootstrap repetitions and the interval they give (our choice: 200 draws, 5th–95th percentile). */
export const BOOTSTRAP_REPS = 200;
export const INTERVAL = [0.05, 0.95] as const;

/** Relatedness of two driver terms: the largest relatedness between their labels (a compound relates through its parts). */
function termRelatedness(a: number[], b: number[], relatedness: Relatedness): number {
  const size = relatedness.labels.length;
  let best = 0;
  for (const x of a) for (const y of b) best = Math.max(best, relatedness.matrix[x * size + y]);
  return best;
}

function percentile(sorted: Float64Array, fraction: number): number {
  if (sorted.length === 0) return NaN;
  const at = fraction * (sorted.length - 1);
  const lo = Math.floor(at);
  const hi = Math.min(sorted.length - 1, lo + 1);
  return sorted[lo] + (sorted[hi] - sorted[lo]) * (at - lo);
}

/**
 * Parametric bootstrap of the shares and the concept count: each group mean (every driver's alone group and the
 * none group) is redrawn as mean + sd/√n · Z (the normal limit of resampling the probes of each group), the effects
 * are clamped at 0, and shares and count are recomputed. Seeded by the unit index.
 */
function bootstrap(drivers: Driver[], similarity: Float64Array, order: number, seed: number): { count: [number, number]; shares: [number, number][] } {
  const k = drivers.length;
  const uniform = mulberry32(0x5eed ^ Math.imul(seed + 1, 2654435761));
  const normal = () => gaussian(uniform);
  const counts = new Float64Array(BOOTSTRAP_REPS);
  const shares = Array.from({ length: k }, () => new Float64Array(BOOTSTRAP_REPS));
  const effects = new Float64Array(k);
  const base = drivers[0].none;
  for (let rep = 0; rep < BOOTSTRAP_REPS; rep++) {
    const none = base.mean + (base.n > 0 ? (base.sd / Math.sqrt(base.n)) * normal() : 0);
    for (let i = 0; i < k; i++) {
      const a = drivers[i].alone;
      effects[i] = Math.max(0, a.mean + (a.n > 0 ? (a.sd / Math.sqrt(a.n)) * normal() : 0) - none);
    }
    let total = 0;
    for (let i = 0; i < k; i++) total += effects[i];
    const p = new Float64Array(k);
    for (let i = 0; i < k; i++) {
      p[i] = total > 0 ? effects[i] / total : 0;
      shares[i][rep] = p[i];
    }
    counts[rep] = total > 0 ? leinsterCobbold(p, similarity, order) : 0;
  }
  counts.sort();
  for (const s of shares) s.sort();
  return {
    count: [percentile(counts, INTERVAL[0]), percentile(counts, INTERVAL[1])],
    shares: shares.map((s) => [percentile(s, INTERVAL[0]), percentile(s, INTERVAL[1])]),
  };
}

function checkShapes(partials: UnitPartial[], relatedness: Relatedness): void {
  const labelTotal = relatedness.labels.length;
  if (relatedness.matrix.length !== labelTotal * labelTotal) {
    throw new SkeinError({
      code: 'request',
      message: `The relatedness table has ${relatedness.matrix.length} cells for ${labelTotal} labels; rebuild it.`,
      where: 'relatedness.matrix',
    });
  }
  for (const partial of partials) {
    if (partial.auroc.length !== labelTotal) {
      throw new SkeinError({
        code: 'request',
        message: `Unit ${partial.unit} was scored with ${partial.auroc.length} labels but the relatedness table has ${labelTotal}; score the layer again with one probe set.`,
        where: `unit ${partial.unit}`,
      });
    }
  }
}

/** Pass 2: scores for every unit of one layer, in the order of `partials`. */
export function finishLayer(partials: UnitPartial[], relatedness: Relatedness, opts: ScoreOptions): UnitScore[] {
  validateScoreOptions(opts);
  checkShapes(partials, relatedness);
  const labelTotal = relatedness.labels.length;
  const dead = partials.map((partial) => isDead(partial, opts));
  const qByUnit = layerQValues(partials, dead);
  const enrichmentQ = enrichmentQValues(partials, dead);

  return partials.map((partial, u): UnitScore => {
    const q = qByUnit[u];
    const joint = partial.joint;
    const flags: UnitScore['flags'] = [];
    if (dead[u]) flags.push('dead');
    else if (isDense(partial, opts)) flags.push('dense');

    const condQ = new Float64Array(labelTotal).fill(1);
    const stats: LabelStat[] = [];
    for (let l = 0; l < labelTotal; l++) {
      if (joint.labelTest[l] >= 0) condQ[l] = q[joint.labelTest[l]];
      stats.push({
        label: l, n1: partial.labelCount[l], meanWith: partial.meanWith[l], meanWithout: partial.meanWithout[l],
        auroc: partial.auroc[l], topHits: partial.topHits[l], p: partial.p[l], q: enrichmentQ[u][l],
      });
    }

    // drivers: the joint model's drivers whose conditional test survives BH across the layer
    const kept: { term: JointTerm; q: number }[] = [];
    const modulators: Modulator[] = [];
    joint.terms.forEach((term, i) => {
      if (dead[u] || q[i] > opts.maxQ) return;
      if (term.kind === 'driver') kept.push({ term, q: q[i] });
    });
    joint.terms.forEach((term, i) => {
      if (dead[u] || q[i] > opts.maxQ || term.kind !== 'modulator') return;
      if (!kept.some((k) => k.term.labels.join() === term.of!.join())) return;
      modulators.push({ label: term.labels[0], of: term.of!, auroc: term.auroc, q: q[i], with: term.alone, without: term.none });
    });

    const effects = new Float64Array(kept.length);
    kept.forEach((k, i) => (effects[i] = Math.max(0, k.term.alone.mean - k.term.none.mean)));
    const shares = massShares(effects);
    const k = kept.length;
    const similarity = new Float64Array(k * k);
    const sameAs: number[][][] = kept.map(() => []);
    for (let i = 0; i < k; i++) {
      for (let j = 0; j < k; j++) {
        if (i === j) { similarity[i * k + j] = 1; continue; }
        const same = kept[i].term.sameAs.some((ls) => ls.join() === kept[j].term.labels.join());
        if (same) sameAs[i].push(kept[j].term.labels);
        similarity[i * k + j] = same ? 1 : termRelatedness(kept[i].term.labels, kept[j].term.labels, relatedness);
      }
    }
    const conceptCount = leinsterCobbold(shares, similarity, opts.diversityOrder);
    let drivers: Driver[] = kept.map(({ term, q: qi }, i) => ({
      label: term.labels[0], labels: term.labels, auroc: term.auroc, q: qi, share: shares[i], shareLow: shares[i], shareHigh: shares[i],
      effect: effects[i], upper: term.upper, alone: term.alone, others: term.others, none: term.none, sameAs: sameAs[i],
    }));
    let conceptLow = conceptCount;
    let conceptHigh = conceptCount;
    if (k > 0) {
      const b = bootstrap(drivers, similarity, opts.diversityOrder, partial.unit);
      conceptLow = Math.min(conceptCount, b.count[0]);
      conceptHigh = Math.max(conceptCount, b.count[1]);
      drivers.forEach((d, i) => { d.shareLow = Math.min(d.share, b.shares[i][0]); d.shareHigh = Math.max(d.share, b.shares[i][1]); });
    }
    drivers = drivers.sort((a, b) => b.share - a.share || a.label - b.label);
    let evidence = 0;
    for (const d of drivers) evidence += -Math.log10(Math.max(d.q, MIN_Q_FOR_EVIDENCE));

    let explanation: UnitFormula | null = null;
    if (!dead[u]) {
      if (k > 0 && joint.formula) explanation = { terms: joint.formula.terms, iou: joint.formula.iou, threshold: joint.formula.threshold, basis: 'drivers' };
      else if (partial.explanation) explanation = { terms: partial.explanation.labels.map((l) => [l]), iou: partial.explanation.iou, threshold: null, basis: 'top set' };
    }

    return {
      unit: partial.unit,
      conceptCount,
      conceptLow,
      conceptHigh,
      selectivity: partial.selectivity,
      flags,
      drivers,
      modulators,
      nested: dead[u] ? [] : joint.nested,
      explanation,
      evidence,
      activeFraction: partial.activeFraction,
      mean: partial.mean,
      max: partial.max,
      topThreshold: partial.topThreshold,
      topProbes: partial.topProbes,
      topValues: partial.topValues,
      condAuroc: joint.labelAuroc,
      condQ,
      stats,
    };
  });
}

const CONCEPT_COUNT_TIE = 1e-9;
const EVIDENCE_TIE = 1e-9;

/**
 * Most polysemantic first. Order: unflagged before flagged (dead/dense); the lower end of the concept count's 90%
 * interval descending, then the concept count (within 1e-9 is a tie); evidence Σ −log10 q over drivers descending; then `layerOrder` ascending (when the items carry one), unit
 * index ascending, and input position, so the result is deterministic. Returns a new array.
 */
export function rankUnits<T extends { score: UnitScore; layerOrder?: number }>(items: T[]): T[] {
  return items
    .map((item, position) => ({ item, position }))
    .sort((x, y) => {
      const a = x.item.score;
      const b = y.item.score;
      const flaggedA = a.flags.length > 0 ? 1 : 0;
      const flaggedB = b.flags.length > 0 ? 1 : 0;
      if (flaggedA !== flaggedB) return flaggedA - flaggedB;
      // the conservative figure first: the lower end of the concept count's bootstrap interval
      if (Math.abs(a.conceptLow - b.conceptLow) > CONCEPT_COUNT_TIE) return b.conceptLow - a.conceptLow;
      if (Math.abs(a.conceptCount - b.conceptCount) > CONCEPT_COUNT_TIE) return b.conceptCount - a.conceptCount;
      if (Math.abs(a.evidence - b.evidence) > EVIDENCE_TIE) return b.evidence - a.evidence;
      const layerA = x.item.layerOrder ?? 0;
      const layerB = y.item.layerOrder ?? 0;
      if (layerA !== layerB) return layerA - layerB;
      if (a.unit !== b.unit) return a.unit - b.unit;
      return x.position - y.position;
    })
    .map(({ item }) => item);
}
