/** Seeded randomness: every draw comes from one explicit generator, so demo builds and bootstrap resamples repeat exactly. */

export type Rng = () => number;

/** mulberry32: a 32-bit state generator returning floats in [0, 1) (Tommy Ettinger's public-domain construction, from memory). */
export function mulberry32(seed: number): Rng {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function uniform(rng: Rng, low: number, high: number): number {
  return low + (high - low) * rng();
}

export function randomInt(rng: Rng, count: number): number {
  return Math.floor(rng() * count);
}

/** Standard normal draw by the Box–Muller transform (Box & Muller 1958). */
export function gaussian(rng: Rng): number {
  const u = 1 - rng(); // in (0, 1], keeps log finite
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rng());
}

/** In-place Fisher–Yates shuffle (Durstenfeld's variant). */
export function shuffle(values: Int32Array, rng: Rng): void {
  for (let i = values.length - 1; i > 0; i--) {
    const j = randomInt(rng, i + 1);
    const tmp = values[i];
    values[i] = values[j];
    values[j] = tmp;
  }
}
