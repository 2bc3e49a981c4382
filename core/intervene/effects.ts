/**
 * What an ablation cost, per probe and per label. Per probe, the harm h_p (positive = the model got worse):
 *   class targets  h_p = mean over the probe's target classes c of (base_c − ablated_c): the drop of the target's
 *                  logit or probability (whatever the output holds); plus top-k accuracy, k = the probe's target count
 *   value targets  h_p = (ablated − y)² − (base − y)²: the rise of the squared error
 *   no targets     h_p = KL(base ‖ ablated) when every baseline row is a probability distribution, else the L2 norm
 *                  of the change of the output row
 * Per label ℓ (probes carrying ℓ): mean harm, a percentile bootstrap interval over probes, and a one-sided Welch test
 * that ℓ's probes lose more than the other probes by more than the minimum effect δ (probes carry several labels, so
 * a cost to red probes alone must not count for the forms and places they also carry); Benjamini–Hochberg across
 * labels; ℓ is hurt when q ≤ 0.05 and its mean exceeds the others' by more than δ. A cost every probe pays alike
 * shows in `overall` (one-sample t-test of the mean harm over all probes > δ), not as hurt labels.
 * δ is 1 % of the metric's own scale (common practice, no source): the mean |target value| for class targets, the
 * variance of the targets for value targets, 0.01 nats for KL, the mean baseline output norm for L2.
 */
import { benjaminiHochberg, leinsterCobbold } from '../score/stats.ts';
import { mulberry32 } from '../random.ts';
import { bootstrapMeanInterval, meanAboveFloorP, welchAboveP } from './stats.ts';
import type { Targets } from './targets.ts';

export type HarmMetric = 'target-drop' | 'squared-error' | 'kl' | 'l2';

export const HURT_Q = 0.05;
export const MIN_EFFECT_FRACTION = 0.01;
export const INTERVAL_ALPHA = 0.05;

export interface Baseline {
  /** Probe indices (into the probe set) the outputs belong to, ascending. */
  probes: Int32Array;
  /** Output rows, probe-major: probes.length × width. */
  outputs: Float32Array;
  width: number;
  /** Targets restricted to the same probes (CSR over positions in `probes`), or null. */
  targets: { kind: Targets['kind']; offsets: Int32Array; values: Float64Array } | null;
}

export interface Harm {
  metric: HarmMetric;
  /** Per probe position; NaN where the probe has no target (it then counts for no label). */
  harm: Float64Array;
  /** Class targets only: top-k hit fraction per probe, before and after. */
  hitBase: Float64Array | null;
  hitAblated: Float64Array | null;
  /** The minimum effect δ in the metric's units. */
  floor: number;
}

function isDistribution(rows: Float32Array, width: number): boolean {
  if (width < 2) return false;
  for (let p = 0; p * width < rows.length; p++) {
    let s = 0;
    for (let k = 0; k < width; k++) { const v = rows[p * width + k]; if (!(v >= 0)) return false; s += v; }
    if (Math.abs(s - 1) > 1e-3) return false;
  }
  return true;
}

/** The baseline's metric, its floor δ, and the per-probe hits before any ablation: computed once per run. */
export interface HarmPlan { metric: HarmMetric; floor: number; hitBase: Float64Array | null }

export function planHarm(base: Baseline): HarmPlan {
  const { outputs, width, targets } = base;
  const n = base.probes.length;
  if (targets?.kind === 'class') {
    let s = 0; let c = 0;
    for (let p = 0; p < n; p++) for (let k = targets.offsets[p]; k < targets.offsets[p + 1]; k++) { s += Math.abs(outputs[p * width + targets.values[k]]); c++; }
    return { metric: 'target-drop', floor: MIN_EFFECT_FRACTION * (c ? s / c : 0), hitBase: topKHits(outputs, width, targets) };
  }
  if (targets?.kind === 'value') {
    let s = 0; let s2 = 0; let c = 0;
    for (let p = 0; p < n; p++) if (targets.offsets[p + 1] > targets.offsets[p]) { const y = targets.values[targets.offsets[p]]; s += y; s2 += y * y; c++; }
    const variance = c ? s2 / c - (s / c) ** 2 : 0;
    return { metric: 'squared-error', floor: MIN_EFFECT_FRACTION * variance, hitBase: null };
  }
  if (isDistribution(outputs, width)) return { metric: 'kl', floor: MIN_EFFECT_FRACTION, hitBase: null };
  let s = 0;
  for (let p = 0; p < n; p++) { let q = 0; for (let k = 0; k < width; k++) q += outputs[p * width + k] ** 2; s += Math.sqrt(q); }
  return { metric: 'l2', floor: MIN_EFFECT_FRACTION * (n ? s / n : 0), hitBase: null };
}

/** Fraction of each probe's target classes among its k highest outputs (k = its target count); NaN without targets. */
function topKHits(rows: Float32Array, width: number, targets: NonNullable<Baseline['targets']>): Float64Array {
  const n = targets.offsets.length - 1;
  const hits = new Float64Array(n);
  for (let p = 0; p < n; p++) {
    const a = targets.offsets[p]; const b = targets.offsets[p + 1];
    if (a === b) { hits[p] = NaN; continue; }
    let hit = 0;
    for (let k = a; k < b; k++) {
      const v = rows[p * width + targets.values[k]];
      let above = 0; // classes strictly higher than this target: it is in the top k when fewer than k are
      for (let j = 0; j < width; j++) if (rows[p * width + j] > v) above++;
      if (above < b - a) hit++;
    }
    hits[p] = hit / (b - a);
  }
  return hits;
}

/** Per-probe harm of one ablation against the baseline (see the header for each metric). */
export function probeHarm(base: Baseline, plan: HarmPlan, ablated: Float32Array): Harm {
  const { outputs, width, targets } = base;
  const n = base.probes.length;
  const harm = new Float64Array(n);
  if (plan.metric === 'target-drop') {
    for (let p = 0; p < n; p++) {
      const a = targets!.offsets[p]; const b = targets!.offsets[p + 1];
      if (a === b) { harm[p] = NaN; continue; }
      let s = 0;
      for (let k = a; k < b; k++) { const c = p * width + targets!.values[k]; s += outputs[c] - ablated[c]; }
      harm[p] = s / (b - a);
    }
    return { metric: plan.metric, harm, hitBase: plan.hitBase, hitAblated: topKHits(ablated, width, targets!), floor: plan.floor };
  }
  if (plan.metric === 'squared-error') {
    for (let p = 0; p < n; p++) {
      if (targets!.offsets[p + 1] === targets!.offsets[p]) { harm[p] = NaN; continue; }
      const y = targets!.values[targets!.offsets[p]];
      harm[p] = (ablated[p] - y) ** 2 - (outputs[p] - y) ** 2;
    }
  } else if (plan.metric === 'kl') {
    // KL(P ‖ Q) = Σ P log(P/Q) (Kullback & Leibler 1951); terms with P = 0 are 0, Q floored to avoid log 0.
    for (let p = 0; p < n; p++) {
      let s = 0;
      for (let k = 0; k < width; k++) {
        const P = outputs[p * width + k]; const Q = Math.max(ablated[p * width + k], 1e-30);
        if (P > 0) s += P * Math.log(P / Q);
      }
      harm[p] = s;
    }
  } else {
    for (let p = 0; p < n; p++) {
      let s = 0;
      for (let k = 0; k < width; k++) s += (ablated[p * width + k] - outputs[p * width + k]) ** 2;
      harm[p] = Math.sqrt(s);
    }
  }
  return { metric: plan.metric, harm, hitBase: null, hitAblated: null, floor: plan.floor };
}

/** Probes per label, as positions into the baseline's probe list: CSR built once per run. */
export interface LabelIndex { labels: string[]; offsets: Int32Array; positions: Int32Array }

export function labelIndex(labels: string[], labelOffsets: Int32Array, labelIds: Int32Array, probes: Int32Array): LabelIndex {
  const counts = new Int32Array(labels.length + 1);
  for (const p of probes) for (let k = labelOffsets[p]; k < labelOffsets[p + 1]; k++) counts[labelIds[k] + 1]++;
  for (let l = 0; l < labels.length; l++) counts[l + 1] += counts[l];
  const positions = new Int32Array(counts[labels.length]);
  const fill = counts.slice(0, labels.length);
  probes.forEach((p, i) => { for (let k = labelOffsets[p]; k < labelOffsets[p + 1]; k++) positions[fill[labelIds[k]]++] = i; });
  return { labels, offsets: counts, positions };
}

export interface LabelCost {
  label: string;
  /** Probes carrying the label that have a harm value (a target, when targets are used). */
  n: number;
  mean: number;
  /** Bootstrap interval of the mean; null when this pass computed none (the bulk pass keeps the largest effect's only). */
  interval: [number, number] | null;
  p: number;
  q: number;
  hurt: boolean;
  /** Mean harm on the probes without the label. */
  meanOthers: number;
  /** Class targets: top-k accuracy on these probes before and after. */
  accuracyBase: number | null;
  accuracyAblated: number | null;
}

export interface CostOptions {
  /** Bootstrap resamples per interval. */
  reps: number;
  /** 'all': an interval for every label (a unit's own check); 'largest': only for the largest effect (the bulk pass). */
  intervals: 'all' | 'largest';
  seed: number;
}

export interface UnitCost {
  metric: HarmMetric;
  floor: number;
  probes: number;
  labels: LabelCost[];
  hurt: string[];
  largest: { label: string; mean: number; interval: [number, number] | null } | null;
  /** Mean harm over every probe used and its one-sided p against δ: a cost all labels pay alike. */
  overall: { mean: number; p: number; costly: boolean };
  /** Leinster–Cobbold diversity (order 1) of the hurt labels, weighted by excess harm: how many unrelated concepts. */
  conceptsHurt: number;
  reps: number;
}

/** Per-label cost of one ablation and the verdict (see the header). `similarity` is the study's L×L relatedness. */
export function labelCosts(h: Harm, index: LabelIndex, similarity: Float64Array, opts: CostOptions): UnitCost {
  const L = index.labels.length;
  const rows: LabelCost[] = [];
  const p = new Float64Array(L);
  const kept = new Int32Array(index.positions.length);
  const spans: [number, number][] = [];
  let at = 0;
  let total = 0; let total2 = 0; let valid = 0;
  for (let i = 0; i < h.harm.length; i++) { const v = h.harm[i]; if (!Number.isNaN(v)) { total += v; total2 += v * v; valid++; } }
  const overallMean = valid ? total / valid : 0;
  const overallSd = valid > 1 ? Math.sqrt(Math.max(0, (total2 - valid * overallMean * overallMean) / (valid - 1))) : 0;
  const overallP = meanAboveFloorP(overallMean, overallSd, valid, h.floor);
  for (let l = 0; l < L; l++) {
    const start = at;
    let s = 0; let s2 = 0; let ab = 0; let aa = 0;
    for (let k = index.offsets[l]; k < index.offsets[l + 1]; k++) {
      const i = index.positions[k];
      const v = h.harm[i];
      if (Number.isNaN(v)) continue;
      kept[at++] = i; s += v; s2 += v * v;
      if (h.hitBase) { ab += h.hitBase[i]; aa += h.hitAblated![i]; }
    }
    const n = at - start;
    spans.push([start, n]);
    const mean = n ? s / n : NaN;
    const variance = n > 1 ? Math.max(0, (s2 - n * mean * mean) / (n - 1)) : 0;
    const n0 = valid - n;
    const mean0 = n0 ? (total - s) / n0 : NaN;
    const var0 = n0 > 1 ? Math.max(0, (total2 - s2 - n0 * mean0 * mean0) / (n0 - 1)) : 0;
    p[l] = n ? welchAboveP(mean, variance, n, mean0, var0, n0, h.floor) : 1;
    rows.push({ label: index.labels[l], n, mean, meanOthers: mean0, interval: null, p: p[l], q: 1, hurt: false,
      accuracyBase: h.hitBase && n ? ab / n : null, accuracyAblated: h.hitBase && n ? aa / n : null });
  }
  const q = benjaminiHochberg(p);
  const rng = mulberry32(opts.seed);
  const scratch = new Float64Array(opts.reps);
  let largest = -1;
  rows.forEach((r, l) => {
    r.q = q[l];
    r.hurt = r.n > 0 && q[l] <= HURT_Q && r.mean - r.meanOthers > h.floor;
    if (r.n > 0 && (largest < 0 || r.mean > rows[largest].mean)) largest = l;
  });
  rows.forEach((r, l) => {
    if (r.n > 0 && (opts.intervals === 'all' || l === largest)) {
      const [start, n] = spans[l];
      r.interval = bootstrapMeanInterval(h.harm, kept.subarray(start, start + n), n, opts.reps, rng, INTERVAL_ALPHA, scratch);
    }
  });
  const hurtIds = rows.map((r, l) => (r.hurt ? l : -1)).filter((l) => l >= 0);
  const shares = new Float64Array(hurtIds.length);
  // Weights: each hurt label's excess cost over the other probes.
  const excess = hurtIds.reduce((s, l) => s + rows[l].mean - rows[l].meanOthers, 0);
  hurtIds.forEach((l, i) => { shares[i] = (rows[l].mean - rows[l].meanOthers) / excess; });
  const sub = new Float64Array(hurtIds.length * hurtIds.length);
  hurtIds.forEach((a, i) => hurtIds.forEach((b, j) => { sub[i * hurtIds.length + j] = similarity[a * L + b]; }));
  const largestRow = largest >= 0 ? rows[largest] : undefined;
  return {
    metric: h.metric, floor: h.floor, probes: h.harm.length, labels: rows,
    hurt: hurtIds.map((l) => rows[l].label),
    largest: largestRow ? { label: largestRow.label, mean: largestRow.mean, interval: largestRow.interval } : null,
    conceptsHurt: leinsterCobbold(shares, sub, 1),
    overall: { mean: overallMean, p: overallP, costly: overallP <= HURT_Q && overallMean > h.floor },
    reps: opts.reps,
  };
}
