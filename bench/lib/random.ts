/** Seeded randomness for benchmark inputs, so every run measures the same work. */

/** mulberry32 (common practice, no source): a small, fast 32-bit PRNG; returns [0, 1). */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

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
