import type { JointResult } from './joint.ts';
/** Inputs and outputs of core/score. All statistics here are per layer. */

export interface ScoreOptions {
  /** Top quantile that defines a unit's "top activations" (Network Dissection uses 0.005). */
  topQuantile: number;      // default 0.005
  /** Minimum size of the top set, whatever the quantile gives. */
  minTopCount: number;      // default 20
  /** A driver needs q <= this (Benjamini–Hochberg across all unit × label tests of the layer). */
  maxQ: number;             // default 0.05
  /** ...and AUROC >= this. */
  minAuroc: number;         // default 0.75
  /** Leinster–Cobbold order. */
  diversityOrder: number;   // default 1
  /** Dead: active on fewer than this fraction of probes. */
  deadFraction: number;     // default 0.005
  /** Dense: active on at least this fraction of probes ... */
  denseFraction: number;    // default 0.5
  /** ... and no label with |AUROC - 0.5| >= this. */
  densePreference: number;  // default 0.1
  /** Number of top examples kept per unit. */
  topExamples: number;      // default 24
  /** A unit is called mixed (polysemantic) when its concept count is at least this: half-way between one and two effective concepts. */
  polysemanticAt: number;   // default 1.5
}

/** The labels of a probe set in the form the statistics need. */
export interface LabelMatrix {
  count: number;             // N probes
  labels: string[];          // label names; index = id
  labelOffsets: Int32Array;  // CSR, length N+1
  labelIds: Int32Array;
}

/** Label × label similarity in [0, 1], 1 on the diagonal, row-major L×L. */
export interface Relatedness {
  labels: string[];
  matrix: Float64Array;
  /** Where each pair's value came from, for the docs and the UI: per row-major cell. */
  source: ('identity' | 'concepts' | 'wordnet' | 'cooccurrence' | 'override')[];
}

/** Per unit × label statistics. */
export interface LabelStat {
  label: number;           // label id
  n1: number;              // probes with the label
  meanWith: number;
  meanWithout: number;
  auroc: number;
  topHits: number;         // probes with the label inside the unit's top set
  p: number;               // hypergeometric upper-tail p of topHits
  q: number;               // BH q-value across the layer
}

/**
 * A driver of a unit from the joint model: a label, or a compound of 2–3 labels that drives it only together.
 * auroc and q are the conditional test's (alone vs none, core/score/joint.ts); share is the driver's part of
 * Σ effects, with its 90% bootstrap interval.
 */
export interface Driver {
  /** The first label id (kept for readers of the one-label form); `labels` names every part of a compound. */
  label: number;
  labels: number[];
  auroc: number;
  q: number;
  share: number;
  shareLow: number;
  shareHigh: number;
  /** mean alone − mean none */
  effect: number;
  upper: number;
  alone: TermGroup;
  others: { n: number; mean: number };
  none: TermGroup;
  /** Labels of other drivers counted as the same concept because their probes nearly coincide (IoU ≥ 0.9). */
  sameAs: number[][];
}

/** A label that raises the response of a driver only (not counted as a concept). */
export interface Modulator {
  label: number;
  of: number[];
  auroc: number;
  q: number;
  /** the driver's alone probes with the label / without it */
  with: TermGroup;
  without: TermGroup;
}

/** A label the joint model set aside because its response is that of a driver it (nearly) contains. */
export interface Nested { label: number; within: number[]; auroc: number }

export interface UnitScore {
  unit: number;
  conceptCount: number;    // Leinster–Cobbold diversity of the driver shares; 0 when no driver
  /** 90% parametric-bootstrap interval of the concept count; the ranking uses conceptLow. */
  conceptLow: number;
  conceptHigh: number;
  selectivity: number;     // class selectivity index (Morcos et al. 2018)
  flags: ('dead' | 'dense')[];
  drivers: Driver[];       // sorted by share, largest first
  modulators: Modulator[];
  nested: Nested[];
  /** Formula: OR over terms (each an AND of labels). basis 'drivers': built from the drivers, unit binarised at
   *  `threshold` (IoU over all probes); basis 'top set': no driver, the best OR of up to 3 labels against the top set. */
  explanation: UnitFormula | null;
  evidence: number;        // sum over drivers of -log10(q), the tie-breaker
  activeFraction: number;
  mean: number;
  max: number;
  topThreshold: number;    // activation at the top-quantile cut
  topProbes: Int32Array;   // probe indices of the top examples, highest first (ScoreOptions.topExamples)
  topValues: Float32Array;
  /** conditional AUROC and q of each single label as last tested by the joint model (NaN / 1 when not a candidate) */
  condAuroc: Float64Array;
  condQ: Float64Array;
  stats: LabelStat[];      // one per label, by label id
}

/** Where a relatedness cell came from (first match wins, in this order after the diagonal). */
export type RelatednessSource = Relatedness['source'][number];

/** Best OR-formula of up to 3 labels (Mu & Andreas 2020): label ids ascending and its IoU with the top set. */
export interface Explanation { labels: number[]; iou: number }

export interface UnitFormula { terms: number[][]; iou: number; threshold: number | null; basis: 'drivers' | 'top set' }

/**
 * Pass-1 result for one unit: everything that does not need the layer's other units.
 * Memory is O(L + topExamples): the N activations are not kept. Arrays are indexed by label id.
 * The compositional explanation needs only this unit's top set, so it is computed here, not in finishLayer.
 */
export interface UnitPartial {
  unit: number;
  probeCount: number;      // N
  min: number;
  max: number;
  mean: number;
  activeFraction: number;  // fraction of probes with a_i > min_a + tolerance (see core/score/unit.ts)
  topThreshold: number;    // activation of the T-th highest probe, T = top-set size before dropping floor probes
  topCount: number;        // probes in the top set (the T highest, without probes at the unit's floor)
  selectivity: number;
  /** Probes per label; shared, read-only (the same array for every unit of a LabelMatrix). */
  labelCount: Int32Array;
  meanWith: Float64Array;  // NaN when no probe carries the label
  meanWithout: Float64Array; // NaN when every probe carries the label
  auroc: Float64Array;
  topHits: Int32Array;
  p: Float64Array;         // hypergeometric upper tail; 1 for labels that cannot be tested (n1 = 0 or n0 = 0)
  topMass: Float64Array;   // sum over top-set probes with the label of (a_i - min_a)
  topProbes: Int32Array;
  topValues: Float32Array;
  explanation: Explanation | null;
  /** The joint model's result (core/score/joint.ts): drivers, modulators, nested labels, tests, formula. */
  joint: JointResult;
}

/** Count, mean and standard deviation (n − 1) of the activations of a group of probes. */
export interface TermGroup { n: number; mean: number; sd: number }

/**
 * One term of a unit's joint model (core/score/joint.ts): a label, or a compound (every one of 2–3 labels present).
 * - driver: `alone` = probes with the term and no other driver (its parts and labels containing it excepted),
 *   `others` = with the term and another driver, `none` = probes with no driver; auroc/p compare alone with none.
 * - modulator: a label that raises the response of driver `of` only: `alone` = that driver's alone probes with the
 *   label, `none` = its alone probes without it; auroc/p compare the two.
 */
export interface JointTerm {
  labels: number[];
  kind: 'driver' | 'modulator';
  of: number[] | null;
  auroc: number;
  p: number;
  /** Fraction of the `none` group below the median of the `alone` group (ties half); NaN for modulators. */
  upper: number;
  alone: TermGroup;
  others: { n: number; mean: number };
  none: TermGroup;
  /** drivers only: the labels of other drivers whose probes nearly coincide with this one's (IoU ≥ 0.9) */
  sameAs: number[][];
}

/** The formula built from the drivers: OR over `terms`, each an AND of its labels, and the unit binarised at `threshold`. */
export interface JointFormula { terms: number[][]; iou: number; threshold: number }
