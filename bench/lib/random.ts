/** Seeded randomness for benchmark inputs, so every run measures the same work. */

/** The one seeded generator Skein uses everywhere (core/random.ts, mulberry32). */
import { mulberry32 as rng } from '../../core/random.ts';

export { rng };

/** Uniform values in [low, high). */
export function uniform(count: number, low: number, high: number, seed: number): Float32Array {
  const r = rng(seed);
  const out = new Float32Array(count);
  const span = high - low;
  for (let i = 0; i < count; i++) out[i] = low + span * r();
  return out;
}

/** Approximately standard normal values: the sum of four uniforms, centred and scaled (Irwin–Hall, common practice). */
export function roughNormal(count: number, seed: number): Float32Array {
  const r = rng(seed);
  const out = new Float32Array(count);
  const scale = Math.sqrt(3); // Irwin–Hall(4) has variance 4/12
  for (let i = 0; i < count; i++) out[i] = (r() + r() + r() + r() - 2) * scale;
  return out;
}
