/**
 * Synthetic activations for scoring benchmarks: ReLU-like units over random labels, some driven by 1–3 labels,
 * so the statistics do real work (ties at zero, enriched top sets, a few drivers per unit).
 * Generated unit by unit from a shared noise table, so making 200k × 4096 values costs memcpy-level time.
 */
import type { LabelMatrix } from '../../core/score/index.ts';
import { labelName, randomLabels } from './probes.ts';
import { rng, roughNormal } from './random.ts';

export interface SyntheticSpec {
  probes: number;
  units: number;
  labels: number;
  seed: number;
}

const NOISE_TABLE = 1 << 20;

export class SyntheticActivations {
  readonly labels: LabelMatrix;
  private readonly noise: Float32Array;
  /** Probes of each label (CSR transpose of the label matrix). */
  private readonly labelProbeOffsets: Int32Array;
  private readonly labelProbeIds: Int32Array;

  constructor(readonly spec: SyntheticSpec) {
    const { offsets, ids } = randomLabels(spec.probes, spec.labels, spec.seed);
    this.labels = { count: spec.probes, labels: Array.from({ length: spec.labels }, (_, i) => labelName(i)), labelOffsets: offsets, labelIds: ids };
    this.noise = roughNormal(NOISE_TABLE, spec.seed + 7);
    const counts = new Int32Array(spec.labels + 1);
    for (const id of ids) counts[id + 1]++;
    for (let l = 0; l < spec.labels; l++) counts[l + 1] += counts[l];
    const fill = counts.slice(0, spec.labels);
    const probeIds = new Int32Array(ids.length);
    for (let p = 0; p < spec.probes; p++) for (let k = offsets[p]; k < offsets[p + 1]; k++) probeIds[fill[ids[k]]++] = p;
    this.labelProbeOffsets = counts;
    this.labelProbeIds = probeIds;
  }

  /** Unit u's activations over all probes (deterministic in spec.seed and u). */
  fill(unit: number, out: Float32Array): Float32Array {
    const n = this.spec.probes;
    const r = rng(this.spec.seed * 7919 + unit);
    let at = Math.floor(r() * NOISE_TABLE);
    for (let i = 0; i < n; ) {
      const take = Math.min(n - i, NOISE_TABLE - at);
      out.set(this.noise.subarray(at, at + take), i);
      i += take;
      at = 0;
    }
    // 0–3 driver labels with effects of 1–3 noise SDs
    const drivers = Math.floor(r() * 4);
    for (let d = 0; d < drivers; d++) {
      const label = Math.floor(r() * this.spec.labels);
      const effect = 1 + 2 * r();
      for (let k = this.labelProbeOffsets[label]; k < this.labelProbeOffsets[label + 1]; k++) out[this.labelProbeIds[k]] += effect;
    }
    // a ReLU with a per-unit bias: from mostly silent (−2) to mostly active (+1)
    const bias = -2 + 3 * r();
    for (let i = 0; i < n; i++) {
      const v = out[i] + bias;
      out[i] = v > 0 ? v : 0;
    }
    return out;
  }
}
