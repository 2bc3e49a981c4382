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

export interface Driver { label: number; auroc: number; q: number; share: number }

export interface UnitScore {
  unit: number;
  conceptCount: number;    // Leinster–Cobbold diversity of the driver mixture; 0 when no driver
  selectivity: number;     // class selectivity index (Morcos et al. 2018)
  flags: ('dead' | 'dense')[];
  drivers: Driver[];       // sorted by share, largest first
  explanation: { labels: number[]; iou: number } | null; // best OR-formula of up to 3 labels
  evidence: number;        // sum over drivers of -log10(q), the tie-breaker
  activeFraction: number;
  mean: number;
  max: number;
  topThreshold: number;    // activation at the top-quantile cut
  topProbes: Int32Array;   // probe indices of the top examples, highest first (ScoreOptions.topExamples)
  topValues: Float32Array;
  stats: LabelStat[];      // one per label, by label id
}

/** Where a relatedness cell came from (first match wins, in this order after the diagonal). */
export type RelatednessSource = Relatedness['source'][number];

/** Best OR-formula of up to 3 labels (Mu & Andreas 2020): label ids ascending and its IoU with the top set. */
export interface Explanation { labels: number[]; iou: number }

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
}
