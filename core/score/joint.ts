/**
 * The joint, conditional model of what drives one unit (see core/score/NOTES.md, "Drivers").
 *
 * Terms are labels or compounds (all of 2–3 labels present). For a set C of candidate terms, a probe is
 *  - "none" when it carries no term of C (the baseline),
 *  - "alone" for term t when every term of C it carries is implied by t (t's own parts, or a term whose probes
 *    contain ≥ NEST_CONTAINMENT of t's probes, so a superset label does not hide its subset),
 *  - "with others" for t when it carries t and some term t does not imply.
 * Each term is tested by a one-sided Mann–Whitney test of its "alone" probes against the "none" probes; all terms
 * of C are tested in one sweep over the unit's single descending sort. Candidates that fail the test or the effect
 * floors are dropped together and the sweep repeats until C is stable (backward elimination). A compound is dropped
 * when one of its parts (or a smaller compound of them) is itself a driver: then the extra label only raises the
 * response of that driver, and it is reported as a modulator instead. Modulators are tested inside each driver's
 * "alone" probes: with the label against without it.
 */
import type { PreparedLabels } from './labels.ts';
import { mannWhitneyGreaterP } from './stats.ts';
import type { JointFormula, JointTerm, ScoreOptions, TermGroup } from './types.ts';

/** Constants of the joint model (our choices; the reasons are in NOTES.md). */
export const JOINT = Object.freeze({
  /** A label is a candidate when its marginal AUROC is at least this (a screen, not a test). */
  screenAuroc: 0.55,
  /** At most this many single-label candidates per unit (highest marginal AUROC first). */
  maxSingles: 10,
  /** A pair or triple is a compound candidate when it is on at least this fraction of the top set ... */
  compoundTopFraction: 0.25,
  /** ... and at most this many compounds (most frequent in the top set first). */
  maxCompounds: 4,
  /** Term b contains term a when at least this fraction of a's probes carry b. */
  nestContainment: 0.9,
  /** Two drivers whose probe sets overlap this much (IoU) are one concept. */
  sameConceptIou: 0.9,
  /** Upper-part floor: the median of a driver's "alone" probes lies above this fraction of the "none" probes. */
  upperFraction: 0.9,
  /** A term needs this many "alone" probes (and the baseline this many) to be tested. */
  minGroup: 5,
  /** A driver's effect (mean alone − mean none) must be at least this fraction of the strongest driver's. */
  relativeEffect: 0.2,
  /** Elimination sweeps at most (each drops every failing candidate at once). */
  maxSweeps: 6,
  /** Modulators kept per driver (highest AUROC first). */
  maxModulators: 3,
});

/** Label bits are 16-bit masks: at most this many distinct labels take part in a unit's candidate terms. */
const MAX_LABEL_BITS = 14;

interface Term { labels: number[]; mask: number }

/** N-sized and table buffers reused across units. */
export interface JointScratch {
  labelBit: Int32Array;   // L: bit of each involved label, 0 otherwise
  probeMask: Uint16Array; // N
  inFormula: Uint8Array;  // 2^MAX_LABEL_BITS
  cls: Int8Array;         // 2^MAX_LABEL_BITS: −1 none, t ≥ 0 alone for t, −2 carries terms but alone for none
  present: Uint32Array;   // 2^MAX_LABEL_BITS: bitmask of terms present
  hist: Int32Array;       // 2^MAX_LABEL_BITS
  involved: number[];     // labels whose labelBit is set
}

export function createJointScratch(labelTotal: number, probeCount: number): JointScratch {
  const size = 1 << MAX_LABEL_BITS;
  return {
    labelBit: new Int32Array(labelTotal), probeMask: new Uint16Array(probeCount), inFormula: new Uint8Array(size),
    cls: new Int8Array(size), present: new Uint32Array(size), hist: new Int32Array(size), involved: [],
  };
}

/** Per-term results of one sweep. */
interface SweepResult {
  alone: TermGroup[];
  others: { n: number; mean: number }[];
  none: TermGroup;
  auroc: Float64Array;
  p: Float64Array;
  upper: Float64Array;
  /** modulator tests, per term (only when asked): label → {auroc, p, with, without} */
  modulators: Map<number, { auroc: number; p: number; with: TermGroup; without: TermGroup }>[] | null;
}

const group = (n: number, sum: number, sumSq: number): TermGroup => {
  const mean = n > 0 ? sum / n : NaN;
  const variance = n > 1 ? Math.max(0, (sumSq - n * mean * mean) / (n - 1)) : 0;
  return { n, mean, sd: Math.sqrt(variance) };
};

/** Sets labelBit for the labels of `terms` and returns each term's mask, or null when too many labels take part. */
function assignBits(terms: Term[], scratch: JointScratch, involved: number[]): boolean {
  for (const l of involved) scratch.labelBit[l] = 0;
  involved.length = 0;
  for (const t of terms) for (const l of t.labels) if (!involved.includes(l)) involved.push(l);
  if (involved.length > MAX_LABEL_BITS) return false;
  involved.forEach((l, i) => (scratch.labelBit[l] = 1 << i));
  for (const t of terms) t.mask = t.labels.reduce((m, l) => m | scratch.labelBit[l], 0);
  return true;
}

/** probeMask[i] = OR of the bits of probe i's involved labels; returns the distinct masks that occur. */
function fillProbeMasks(prepared: PreparedLabels, scratch: JointScratch, bits: number): number[] {
  const { labelOffsets, labelIds } = prepared.matrix;
  const n = prepared.probeCount;
  const labelBit = scratch.labelBit;
  const probeMask = scratch.probeMask;
  const hist = scratch.hist;
  hist.fill(0, 0, 1 << bits);
  for (let i = 0; i < n; i++) {
    let m = 0;
    for (let j = labelOffsets[i]; j < labelOffsets[i + 1]; j++) m |= labelBit[labelIds[j]];
    probeMask[i] = m;
    hist[m]++;
  }
  const seen: number[] = [];
  for (let m = 0; m < 1 << bits; m++) if (hist[m] > 0) seen.push(m);
  return seen;
}

/**
 * implied[t]: terms that t implies — its parts (terms whose labels are a subset of t's) and terms that contain
 * ≥ nestContainment of t's probes. Counts come from the histogram of probe masks.
 */
function impliedTerms(terms: Term[], masks: number[], hist: Int32Array): Uint32Array {
  const k = terms.length;
  const count = new Float64Array(k);
  const both = new Float64Array(k * k);
  for (const m of masks) {
    const c = hist[m];
    for (let a = 0; a < k; a++) {
      if ((m & terms[a].mask) !== terms[a].mask) continue;
      count[a] += c;
      for (let b = 0; b < k; b++) if ((m & terms[b].mask) === terms[b].mask) both[a * k + b] += c;
    }
  }
  const implied = new Uint32Array(k);
  for (let a = 0; a < k; a++) {
    for (let b = 0; b < k; b++) {
      if (a === b) continue;
      const part = (terms[b].mask & terms[a].mask) === terms[b].mask;
      const contains = count[a] > 0 && both[a * k + b] >= JOINT.nestContainment * count[a];
      if (part || contains) implied[a] |= 1 << b;
    }
  }
  return implied;
}

/** Fills cls/present for every occurring mask. */
function classify(terms: Term[], implied: Uint32Array, masks: number[], scratch: JointScratch): void {
  for (const m of masks) {
    let present = 0;
    for (let t = 0; t < terms.length; t++) if ((m & terms[t].mask) === terms[t].mask) present |= 1 << t;
    scratch.present[m] = present;
    if (present === 0) {
      scratch.cls[m] = -1;
      continue;
    }
    let alone = -2;
    for (let t = 0; t < terms.length; t++) {
      if (!(present & (1 << t))) continue;
      if ((present & ~(implied[t] | (1 << t))) === 0) {
        // several terms may each imply all the others (near-identical labels): the first one takes the probe
        alone = t;
        break;
      }
    }
    scratch.cls[m] = alone;
  }
}

/**
 * One sweep over the descending order: Mann–Whitney of each term's "alone" probes against the "none" probes
 * (mid-ranks over the two groups, tie-corrected), group means, the upper-part fraction, and — when `withModulators`
 * — per term the Mann–Whitney of each other label inside the term's "alone" probes.
 */
function sweep(
  values: Float32Array, order: Int32Array, prepared: PreparedLabels, terms: Term[], scratch: JointScratch,
  withModulators: boolean,
): SweepResult {
  const k = terms.length;
  const n = prepared.probeCount;
  const { labelOffsets, labelIds } = prepared.matrix;
  const labelTotal = prepared.labelTotal;
  const probeMask = scratch.probeMask;
  const cls = scratch.cls;
  const present = scratch.present;

  // group sizes first (the median of each "alone" group is found during the sweep)
  const aloneCount = new Int32Array(k);
  let noneCount = 0;
  for (let i = 0; i < n; i++) {
    const c = cls[probeMask[i]];
    if (c === -1) noneCount++;
    else if (c >= 0) aloneCount[c]++;
  }
  const half = Int32Array.from(aloneCount, (c) => Math.ceil(c / 2));
  const seen = new Int32Array(k);
  const winsAgainst = new Float64Array(k); // Σ over alone probes of (# none above + ½ # none tied)
  const tieExtra = new Float64Array(k);
  const sum = new Float64Array(k);
  const sumSq = new Float64Array(k);
  const othersN = new Int32Array(k);
  const othersSum = new Float64Array(k);
  const noneAboveMedian = new Float64Array(k).fill(NaN);
  const runCount = new Int32Array(k);
  let noneSum = 0;
  let noneSumSq = 0;
  let noneTies = 0;
  let noneAbove = 0;
  // modulators: within each term's alone probes, per label: Σ descending mid-position and count and sum
  const modPos = withModulators ? new Float64Array(k * labelTotal) : null;
  const modCnt = withModulators ? new Int32Array(k * labelTotal) : null;
  const modSum = withModulators ? new Float64Array(k * labelTotal) : null;
  const modSumSq = withModulators ? new Float64Array(k * labelTotal) : null;
  const aloneTies = new Float64Array(k);

  for (let r0 = 0; r0 < n; ) {
    const v = values[order[r0]];
    let r1 = r0;
    while (r1 + 1 < n && values[order[r1 + 1]] === v) r1++;
    let noneTie = 0;
    let touched = 0; // bitmask of terms with alone probes in this run
    for (let r = r0; r <= r1; r++) {
      const c = cls[probeMask[order[r]]];
      if (c === -1) noneTie++;
      else if (c >= 0) {
        runCount[c]++;
        touched |= 1 << c;
      }
    }
    const credit = noneAbove + 0.5 * noneTie;
    for (let r = r0; r <= r1; r++) {
      const probe = order[r];
      const m = probeMask[probe];
      const c = cls[m];
      if (c === -1) {
        noneSum += v;
        noneSumSq += v * v;
        continue;
      }
      if (c >= 0) {
        winsAgainst[c] += credit;
        sum[c] += v;
        sumSq[c] += v * v;
        seen[c]++;
        if (seen[c] === half[c]) noneAboveMedian[c] = credit;
      } else {
        let p = present[m];
        while (p) {
          const t = 31 - Math.clz32(p);
          p &= ~(1 << t);
          othersN[t]++;
          othersSum[t] += v;
        }
      }
    }
    if (touched) {
      let bits = touched;
      while (bits) {
        const t = 31 - Math.clz32(bits);
        bits &= ~(1 << t);
        const c = runCount[t];
        const pooled = noneTie + c;
        tieExtra[t] += pooled * pooled * pooled - pooled - (noneTie * noneTie * noneTie - noneTie);
        aloneTies[t] += c * c * c - c;
        if (modPos) {
          // descending positions of this run inside t's alone group: seen[t]−c+1 .. seen[t]; mid-position:
          const midPosition = seen[t] - (c - 1) / 2;
          for (let r = r0; r <= r1; r++) {
            const probe = order[r];
            if (cls[probeMask[probe]] !== t) continue;
            for (let j = labelOffsets[probe]; j < labelOffsets[probe + 1]; j++) {
              const cell = t * labelTotal + labelIds[j];
              modPos[cell] += midPosition;
              modCnt![cell]++;
              modSum![cell] += v;
              modSumSq![cell] += v * v;
            }
          }
        }
        runCount[t] = 0;
      }
    }
    noneTies += noneTie * noneTie * noneTie - noneTie;
    noneAbove += noneTie;
    r0 = r1 + 1;
  }

  const auroc = new Float64Array(k);
  const p = new Float64Array(k);
  const upper = new Float64Array(k);
  const alone: TermGroup[] = [];
  const others: { n: number; mean: number }[] = [];
  for (let t = 0; t < k; t++) {
    const n1 = aloneCount[t];
    const n0 = noneCount;
    const u = n1 * n0 - winsAgainst[t];
    auroc[t] = n1 > 0 && n0 > 0 ? u / (n1 * n0) : 0.5;
    p[t] = mannWhitneyGreaterP(u, n1, n0, noneTies + tieExtra[t]);
    upper[t] = n1 > 0 && n0 > 0 ? 1 - noneAboveMedian[t] / n0 : 0;
    alone.push(group(n1, sum[t], sumSq[t]));
    others.push({ n: othersN[t], mean: othersN[t] > 0 ? othersSum[t] / othersN[t] : NaN });
  }

  let modulators: SweepResult['modulators'] = null;
  if (modPos) {
    modulators = [];
    for (let t = 0; t < k; t++) {
      const found = new Map<number, { auroc: number; p: number; with: TermGroup; without: TermGroup }>();
      const nd = aloneCount[t];
      for (let l = 0; l < labelTotal; l++) {
        const cell = t * labelTotal + l;
        const n1 = modCnt![cell];
        const n0 = nd - n1;
        if (n1 < JOINT.minGroup || n0 < JOINT.minGroup || terms[t].labels.includes(l)) continue;
        // ascending rank sum inside the group: Σ (nd + 1 − descending position)
        const rankSum = n1 * (nd + 1) - modPos[cell];
        const u = rankSum - (n1 * (n1 + 1)) / 2;
        const withGroup = group(n1, modSum![cell], modSumSq![cell]);
        const without = group(n0, sum[t] - modSum![cell], sumSq[t] - modSumSq![cell]);
        found.set(l, { auroc: u / (n1 * n0), p: mannWhitneyGreaterP(u, n1, n0, aloneTies[t]), with: withGroup, without });
      }
      modulators.push(found);
    }
  }
  return { alone, others, none: group(noneCount, noneSum, noneSumSq), auroc, p, upper, modulators };
}

/** Does term t pass as a driver in this sweep? (raw p gate; BH across the layer is applied in pass 2) */
function passes(r: SweepResult, t: number, opts: ScoreOptions, strongest: number): boolean {
  const a = r.alone[t];
  if (a.n < JOINT.minGroup || r.none.n < JOINT.minGroup) return false;
  const effect = a.mean - r.none.mean;
  return r.p[t] <= opts.maxQ && r.auroc[t] >= opts.minAuroc && r.upper[t] >= JOINT.upperFraction && effect > 0 &&
    effect >= JOINT.relativeEffect * strongest;
}

function strongestEffect(r: SweepResult, opts: ScoreOptions): number {
  let best = 0;
  for (let t = 0; t < r.alone.length; t++) {
    if (r.alone[t].n < JOINT.minGroup || r.p[t] > opts.maxQ || r.auroc[t] < opts.minAuroc) continue;
    best = Math.max(best, r.alone[t].mean - r.none.mean);
  }
  return best;
}

export interface JointInput {
  values: Float32Array;
  order: Int32Array;               // descending
  prepared: PreparedLabels;
  marginalAuroc: Float64Array;
  topCount: number;
  insidePairs: Map<number, number>;   // key a·L + b, a < b: top-set probes with both
  insideTriples: Map<number, number>; // key (a·L + b)·L + c
}

export interface JointResult {
  terms: JointTerm[];
  /** every test's one-sided p, in the order of `terms` (drivers and nested first, then modulators), then candidates dropped */
  tests: Float64Array;
  formula: JointFormula | null;
  /** per single label: conditional AUROC as last tested, and the index of that test in `tests` (NaN / −1 when not a candidate) */
  labelAuroc: Float64Array;
  labelTest: Int32Array;
  /** screened labels set aside because they (nearly) contain a driver: label, the driver's labels, marginal AUROC */
  nested: { label: number; within: number[]; auroc: number }[];
}

export function emptyJoint(labelTotal: number): JointResult {
  return {
    terms: [], tests: new Float64Array(0), formula: null, labelAuroc: new Float64Array(labelTotal).fill(NaN),
    labelTest: new Int32Array(labelTotal).fill(-1), nested: [],
  };
}

/** Candidate terms: screened single labels, then compounds frequent in the top set whose parts are not both candidates' winners. */
function candidates(input: JointInput): Term[] {
  const { marginalAuroc, prepared, topCount } = input;
  const labelTotal = prepared.labelTotal;
  const singles: number[] = [];
  for (let l = 0; l < labelTotal; l++) {
    const n1 = prepared.labelCount[l];
    if (n1 >= JOINT.minGroup && n1 < prepared.probeCount && marginalAuroc[l] >= JOINT.screenAuroc) singles.push(l);
  }
  singles.sort((a, b) => marginalAuroc[b] - marginalAuroc[a] || a - b);
  const terms: Term[] = singles.slice(0, JOINT.maxSingles).map((l) => ({ labels: [l], mask: 0 }));
  if (topCount > 0) {
    const floor = Math.max(JOINT.minGroup, JOINT.compoundTopFraction * topCount);
    const compounds: { labels: number[]; count: number }[] = [];
    for (const [key, count] of input.insidePairs) {
      if (count < floor) continue;
      compounds.push({ labels: [Math.floor(key / labelTotal), key % labelTotal], count });
    }
    for (const [key, count] of input.insideTriples) {
      if (count < floor) continue;
      const c = key % labelTotal;
      const ab = Math.floor(key / labelTotal);
      compounds.push({ labels: [Math.floor(ab / labelTotal), ab % labelTotal, c], count });
    }
    // more specific compounds are tried only when frequent; ties prefer fewer labels
    compounds.sort((x, y) => y.count - x.count || x.labels.length - y.labels.length);
    for (const c of compounds.slice(0, JOINT.maxCompounds)) terms.push({ labels: c.labels, mask: 0 });
  }
  return terms;
}

/**
 * The joint model of one unit. Returns the drivers (kind 'driver'), supersets explained by a driver ('nested') and
 * modulators, with every test's p-value for the layer's Benjamini–Hochberg family.
 */
export function jointModel(input: JointInput, opts: ScoreOptions, scratch: JointScratch): JointResult {
  const { values, order, prepared } = input;
  let terms = candidates(input);
  const involved = scratch.involved;
  const droppedP: number[] = [];
  const labelTotal = prepared.labelTotal;
  const labelAuroc = new Float64Array(labelTotal).fill(NaN);
  const labelTest = new Int32Array(labelTotal).fill(-1);
  const droppedLabel: number[] = []; // label of each dropped single (−1 for compounds), parallel to droppedP
  const empty = (): JointResult => {
    const tests = Float64Array.from(droppedP);
    droppedLabel.forEach((l, i) => { if (l >= 0) labelTest[l] = i; });
    return { terms: [], tests, formula: null, labelAuroc, labelTest, nested: [] };
  };
  if (terms.length === 0) return empty();
  if (!assignBits(terms, scratch, involved)) {
    // too many labels take part: keep the singles only (compounds add up to 3 labels each)
    terms = terms.filter((t) => t.labels.length === 1);
    assignBits(terms, scratch, involved);
  }
  const bits = involved.length;
  const masks = fillProbeMasks(prepared, scratch, bits);

  let result: SweepResult | null = null;
  // held: a single label with a significant positive effect that misses a floor. It is not a driver, but it stays
  // among the candidates, so its probes join neither another driver's "alone" group nor the baseline (dropping it
  // would lift the baseline and could knock out the true drivers one after another).
  let held: boolean[] = terms.map(() => false);
  for (let round = 0; round < JOINT.maxSweeps && terms.length > 0; round++) {
    const implied = impliedTerms(terms, masks, scratch.hist);
    classify(terms, implied, masks, scratch);
    result = sweep(values, order, prepared, terms, scratch, false);
    terms.forEach((t, i) => { if (t.labels.length === 1) labelAuroc[t.labels[0]] = result!.auroc[i]; });
    const strongest = strongestEffect(result, opts);
    const pass: boolean[] = terms.map((_, t) => passes(result!, t, opts, strongest));
    // a compound whose part (or smaller compound of its labels) passes is that part's modulation, not a driver
    terms.forEach((t, i) => {
      if (!pass[i] || t.labels.length === 1) return;
      if (terms.some((s, j) => j !== i && pass[j] && s.labels.length < t.labels.length && (s.mask & t.mask) === s.mask)) pass[i] = false;
    });
    const r = result;
    const nowHeld = terms.map((t, i) => !pass[i] && t.labels.length === 1 && r.alone[i].n >= JOINT.minGroup && r.p[i] <= opts.maxQ &&
      r.alone[i].mean > r.none.mean);
    const keep = terms.map((_, i) => pass[i] || nowHeld[i]);
    const stable = keep.every(Boolean) && nowHeld.every((h, i) => h === held[i]);
    held = nowHeld;
    if (stable) break;
    terms.forEach((t, i) => {
      if (keep[i]) return;
      droppedP.push(result!.p[i]);
      droppedLabel.push(t.labels.length === 1 ? t.labels[0] : -1);
    });
    terms = terms.filter((_, i) => keep[i]);
    held = held.filter((_, i) => keep[i]);
    result = null;
  }
  if (terms.length === 0 || held.every(Boolean)) {
    // only held labels left: no driver; their tests still count in the layer's family
    terms.forEach((t, i) => {
      if (!result) return;
      droppedP.push(result.p[i]);
      droppedLabel.push(t.labels[0]);
    });
    return empty();
  }

  // final sweep over the kept drivers: group statistics and modulators
  // here a held label does not take a probe from a driver's "alone" group (the modulator test runs inside it), but
  // its probes without a driver stay out of the baseline
  const implied = impliedTerms(terms, masks, scratch.hist);
  let heldMask = 0;
  held.forEach((h, i) => { if (h) heldMask |= 1 << i; });
  held.forEach((h, i) => { if (!h) implied[i] |= heldMask; });
  classify(terms, implied, masks, scratch);
  const final = sweep(values, order, prepared, terms, scratch, true);
  const out: JointTerm[] = [];
  const isDriver = (i: number) => !held[i];
  terms.forEach((t, i) => {
    if (!isDriver(i)) return;
    // drivers whose probe sets nearly coincide (IoU ≥ sameConceptIou) are one concept
    const sameAs: number[][] = [];
    for (const [k, o] of terms.entries()) {
      if (o === t || !isDriver(k)) continue;
      let inA = 0;
      let inB = 0;
      let both = 0;
      for (const m of masks) {
        const a = (m & t.mask) === t.mask;
        const b = (m & o.mask) === o.mask;
        if (a) inA += scratch.hist[m];
        if (b) inB += scratch.hist[m];
        if (a && b) both += scratch.hist[m];
      }
      if (both >= JOINT.sameConceptIou * (inA + inB - both)) sameAs.push(o.labels);
    }
    out.push({
      labels: t.labels, kind: 'driver', of: null, auroc: final.auroc[i], p: final.p[i], upper: final.upper[i],
      alone: final.alone[i], others: final.others[i], none: final.none, sameAs,
    });
  });
  terms.forEach((t, i) => {
    if (!isDriver(i)) return;
    const found = [...final.modulators![i].entries()]
      .filter(([l, m]) => m.auroc >= opts.minAuroc && m.p <= opts.maxQ && m.with.mean > m.without.mean && !terms.some((s, k) => isDriver(k) && s.labels.length === 1 && s.labels[0] === l))
      .sort((a, b) => b[1].auroc - a[1].auroc || a[0] - b[0])
      .slice(0, JOINT.maxModulators);
    for (const [l, m] of found) {
      out.push({
        labels: [l], kind: 'modulator', of: t.labels, auroc: m.auroc, p: m.p, upper: NaN,
        alone: m.with, others: { n: 0, mean: NaN }, none: m.without, sameAs: [],
      });
    }
  });
  // held labels' final tests join the family after the drivers' and modulators'
  terms.forEach((t, i) => {
    if (isDriver(i)) return;
    droppedP.push(final.p[i]);
    droppedLabel.push(t.labels[0]);
  });
  const tests = Float64Array.from([...out.map((t) => t.p), ...droppedP]);
  let position = 0;
  terms.forEach((t, i) => {
    if (!isDriver(i)) return;
    if (t.labels.length === 1) {
      labelAuroc[t.labels[0]] = final.auroc[i];
      labelTest[t.labels[0]] = position;
    }
    position++;
  });
  terms.forEach((t, i) => { if (!isDriver(i)) labelAuroc[t.labels[0]] = final.auroc[i]; });
  droppedLabel.forEach((l, i) => { if (l >= 0) labelTest[l] = out.length + i; });
  // screened labels that (nearly) contain a driver's probes and were dropped: the driver explains them
  const nested: JointResult['nested'] = [];
  for (const l of droppedLabel) {
    if (l < 0) continue;
    const bit = scratch.labelBit[l];
    for (const [k, d] of terms.entries()) {
      if (!isDriver(k)) continue;
      let count = 0;
      let both = 0;
      for (const m of masks) {
        if ((m & d.mask) !== d.mask) continue;
        count += scratch.hist[m];
        if (m & bit) both += scratch.hist[m];
      }
      if (count > 0 && both >= JOINT.nestContainment * count && input.marginalAuroc[l] >= opts.minAuroc) {
        nested.push({ label: l, within: d.labels, auroc: input.marginalAuroc[l] });
        break;
      }
    }
  }
  return { terms: out, tests, formula: bestFormula(out, values, order, prepared, scratch, involved), labelAuroc, labelTest, nested };
}

/**
 * Formula from the drivers: OR of drivers (largest effect first) while the labels total at most 3; a compound is an
 * AND of its labels. The unit is binarised at the threshold (between two distinct activations) that maximises the
 * probe-level IoU of {a > threshold} with the formula's probes (a search over every threshold in one sweep).
 */
function bestFormula(
  terms: JointTerm[], values: Float32Array, order: Int32Array, prepared: PreparedLabels, scratch: JointScratch, involved: number[],
): JointFormula | null {
  const drivers = terms.filter((t) => t.kind === 'driver').sort((a, b) => (b.alone.mean - b.none.mean) - (a.alone.mean - a.none.mean));
  const chosen: number[][] = [];
  let size = 0;
  for (const d of drivers) {
    if (size + d.labels.length > 3) continue;
    chosen.push(d.labels);
    size += d.labels.length;
  }
  if (chosen.length === 0) return null;
  const bit = (l: number) => 1 << involved.indexOf(l);
  const masks = chosen.map((ls) => ls.reduce((m, l) => m | bit(l), 0));
  const n = prepared.probeCount;
  const probeMask = scratch.probeMask;
  const inFormula = scratch.inFormula;
  const bits = involved.length;
  let formulaSize = 0;
  for (let m = 0; m < 1 << bits; m++) inFormula[m] = masks.some((f) => (m & f) === f) ? 1 : 0;
  for (let i = 0; i < n; i++) formulaSize += inFormula[probeMask[i]];
  let best = { iou: 0, threshold: values[order[0]] };
  let inside = 0;
  for (let r0 = 0; r0 < n; ) {
    const v = values[order[r0]];
    let r1 = r0;
    while (r1 + 1 < n && values[order[r1 + 1]] === v) r1++;
    for (let r = r0; r <= r1; r++) inside += inFormula[probeMask[order[r]]];
    if (r1 + 1 < n) {
      const above = r1 + 1;
      const iou = inside / (formulaSize + above - inside);
      if (iou > best.iou) best = { iou, threshold: (v + values[order[r1 + 1]]) / 2 };
    }
    r0 = r1 + 1;
  }
  return { terms: chosen, iou: best.iou, threshold: best.threshold };
}
