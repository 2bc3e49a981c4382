/** The demo build draws from Skein's one seeded generator (core/random.ts), so builds repeat exactly. */
export { mulberry32, uniform, randomInt, gaussian, shuffle, type Rng } from '../../core/random.ts';
