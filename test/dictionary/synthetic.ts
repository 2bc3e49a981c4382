/**
 * Activations with known features, as in Sharkey et al. 2022 ("Taking features out of superposition with sparse
 * autoencoders", §2): `features` ground-truth unit directions in `units` dimensions (fewer than the features), each
 * probe a sparse non-negative mix of them — each feature on with probability `p`, with a coefficient uniform in
 * [0, 1] — so a dictionary should find the true directions again. Seeded (core/random.ts).
 */
import { gaussian, mulberry32 } from '../../core/random.ts';
import type { ChunkSource } from '../../core/dictionary/train.ts';

export interface Synthetic { truth: Float32Array; features: number; units: number; probes: number; data: Float32Array }

export function sparseMixture(o: { features: number; units: number; probes: number; p: number; seed: number }): Synthetic {
  const rng = mulberry32(o.seed);
  const truth = new Float32Array(o.features * o.units);
  for (let f = 0; f < o.features; f++) {
    let s = 0;
    for (let i = 0; i < o.units; i++) { const v = gaussian(rng); truth[f * o.units + i] = v; s += v * v; }
    for (let i = 0; i < o.units; i++) truth[f * o.units + i] /= Math.sqrt(s);
  }
  const data = new Float32Array(o.probes * o.units);
  for (let n = 0; n < o.probes; n++) {
    for (let f = 0; f < o.features; f++) {
      if (rng() >= o.p) continue;
      const a = rng();
      for (let i = 0; i < o.units; i++) data[n * o.units + i] += a * truth[f * o.units + i];
    }
  }
  return { truth, features: o.features, units: o.units, probes: o.probes, data };
}

/** An in-memory array served in chunks, as a study layer's cache serves them. */
export function arraySource(data: Float32Array, units: number, chunkSize: number): ChunkSource {
  const probes = data.length / units;
  return { probes, units, chunks: Math.ceil(probes / chunkSize), readChunk: (c) => data.subarray(c * chunkSize * units, Math.min(probes, (c + 1) * chunkSize) * units) };
}

/** Mean over true directions of the best |cosine| with any learned decoder row (Sharkey et al. 2022's MMCS). */
export function meanMaxCosine(truth: Float32Array, features: number, learned: Float32Array, learnedCount: number, units: number): number {
  let total = 0;
  for (let f = 0; f < features; f++) {
    let best = 0;
    for (let j = 0; j < learnedCount; j++) {
      let dot = 0, nn = 0;
      for (let i = 0; i < units; i++) { dot += truth[f * units + i] * learned[j * units + i]; nn += learned[j * units + i] ** 2; }
      const c = nn > 0 ? Math.abs(dot) / Math.sqrt(nn) : 0;
      if (c > best) best = c;
    }
    total += best;
  }
  return total / features;
}
