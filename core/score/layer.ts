/**
 * Pass 2 of scoring: the layer's UnitPartials → UnitScores (BH across the layer, flags, drivers, shares,
 * concept count), and the ranking across layers.
 */
import { SkeinError } from '../errors.ts';
import { benjaminiHochberg, leinsterCobbold, massShares } from './stats.ts';
import { validateScoreOptions } from './unit.ts';
import type { Driver, LabelStat, Relatedness, ScoreOptions, UnitPartial, UnitScore } from './types.ts';

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
 * BH q-values across every unit × label test of the layer. Tests are the labels with 0 < n1 < N on units that are
 * not dead (a dead unit's top set says nothing, so it is not tested and cannot have drivers); untested cells get q = 1.
 */
function layerQValues(partials: UnitPartial[], dead: boolean[]): Float64Array[] {
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

  return partials.map((partial, u): UnitScore => {
    const q = qByUnit[u];
    const flags: UnitScore['flags'] = [];
    if (dead[u]) flags.push('dead');
    else if (isDense(partial, opts)) flags.push('dense');

    const stats: LabelStat[] = [];
    const driverLabels: number[] = [];
    for (let l = 0; l < labelTotal; l++) {
      stats.push({
        label: l,
        n1: partial.labelCount[l],
        meanWith: partial.meanWith[l],
        meanWithout: partial.meanWithout[l],
        auroc: partial.auroc[l],
        topHits: partial.topHits[l],
        p: partial.p[l],
        q: q[l],
      });
      // a driver: q ≤ maxQ and AUROC ≥ minAuroc (dead units have q = 1 everywhere, so never a driver)
      if (!dead[u] && q[l] <= opts.maxQ && partial.auroc[l] >= opts.minAuroc) driverLabels.push(l);
    }

    const masses = new Float64Array(driverLabels.length);
    driverLabels.forEach((l, i) => (masses[i] = partial.topMass[l]));
    const shares = massShares(masses);
    const similarity = new Float64Array(driverLabels.length * driverLabels.length);
    driverLabels.forEach((a, i) =>
      driverLabels.forEach((b, j) => (similarity[i * driverLabels.length + j] = relatedness.matrix[a * labelTotal + b])),
    );
    const conceptCount = leinsterCobbold(shares, similarity, opts.diversityOrder);

    const drivers: Driver[] = driverLabels
      .map((l, i) => ({ label: l, auroc: partial.auroc[l], q: q[l], share: shares[i] }))
      .sort((a, b) => b.share - a.share || a.label - b.label);
    let evidence = 0;
    for (const d of drivers) evidence += -Math.log10(Math.max(d.q, MIN_Q_FOR_EVIDENCE));

    return {
      unit: partial.unit,
      conceptCount,
      selectivity: partial.selectivity,
      flags,
      drivers,
      explanation: dead[u] ? null : partial.explanation,
      evidence,
      activeFraction: partial.activeFraction,
      mean: partial.mean,
      max: partial.max,
      topThreshold: partial.topThreshold,
      topProbes: partial.topProbes,
      topValues: partial.topValues,
      stats,
    };
  });
}

const CONCEPT_COUNT_TIE = 1e-9;
const EVIDENCE_TIE = 1e-9;

/**
 * Most polysemantic first. Order: unflagged before flagged (dead/dense); concept count descending (within 1e-9 is a
 * tie); evidence Σ −log10 q over drivers descending; then `layerOrder` ascending (when the items carry one), unit
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
