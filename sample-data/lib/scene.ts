/**
 * The "tiles" scenario, invented for the Skein demo: a 12×12 RGB tile shows one glyph on a dark background.
 * Three unrelated attribute families vary independently: hue, form and place (the quadrant).
 */
import { gaussian, mulberry32, randomInt, uniform, type Rng } from './prng';

export const TILE_SIZE = 12;
export const TILE_CHANNELS = 3;
export const TILE_VALUES = TILE_CHANNELS * TILE_SIZE * TILE_SIZE;

export interface Concept {
  label: string;
  group: string;
  parent: string;
  description: string;
}

export interface Family {
  name: string;
  concepts: Concept[];
}

const HUE_RGB: Record<string, [number, number, number]> = {
  scarlet: [0.92, 0.16, 0.12],
  amber: [0.96, 0.66, 0.1],
  teal: [0.08, 0.66, 0.62],
  indigo: [0.32, 0.2, 0.82],
};

/** Family order fixes the model's output order: hue 0–3, form 4–7, place 8–11. */
export const FAMILIES: Family[] = [
  {
    name: 'hue',
    concepts: [
      { label: 'scarlet', group: 'hue', parent: 'warm', description: 'glyph painted scarlet, a warm red' },
      { label: 'amber', group: 'hue', parent: 'warm', description: 'glyph painted amber, a warm orange-yellow' },
      { label: 'teal', group: 'hue', parent: 'cool', description: 'glyph painted teal, a cool blue-green' },
      { label: 'indigo', group: 'hue', parent: 'cool', description: 'glyph painted indigo, a cool blue-violet' },
    ],
  },
  {
    name: 'form',
    concepts: [
      { label: 'disc', group: 'form', parent: 'round', description: 'a filled round glyph' },
      { label: 'ring', group: 'form', parent: 'round', description: 'a hollow round glyph' },
      { label: 'bar', group: 'form', parent: 'straight', description: 'a single straight stroke, roughly level' },
      { label: 'cross', group: 'form', parent: 'straight', description: 'two crossing strokes' },
    ],
  },
  {
    name: 'place',
    concepts: [
      { label: 'upper-left', group: 'place', parent: 'upper', description: 'glyph in the upper-left quadrant' },
      { label: 'upper-right', group: 'place', parent: 'upper', description: 'glyph in the upper-right quadrant' },
      { label: 'lower-left', group: 'place', parent: 'lower', description: 'glyph in the lower-left quadrant' },
      { label: 'lower-right', group: 'place', parent: 'lower', description: 'glyph in the lower-right quadrant' },
    ],
  },
];

export const CONCEPTS: Concept[] = FAMILIES.flatMap((f) => f.concepts);
export const FAMILY_COUNT = FAMILIES.length;
export const CONCEPT_COUNT = CONCEPTS.length;
const PER_FAMILY = 4;

/** A generated set: C-order tiles [count,3,12,12] and, per probe, the chosen concept index within each family. */
export interface TileSet {
  count: number;
  tiles: Float32Array;
  /** [count, FAMILY_COUNT]: index (0–3) of the concept of each family. */
  choices: Int32Array;
}

/** Global concept index (0–11, the model's output order) of probe `probe`'s choice in `family`. */
export function conceptIndex(set: TileSet, probe: number, family: number): number {
  return family * PER_FAMILY + set.choices[probe * FAMILY_COUNT + family];
}

/** Inside-test of a glyph in its own frame (glyph centred at the origin, unit scale ≈ 1 pixel). */
function insideGlyph(form: string, u: number, v: number): boolean {
  const r = Math.hypot(u, v);
  switch (form) {
    case 'disc':
      return r <= 2.3;
    case 'ring':
      return r >= 1.4 && r <= 2.55;
    case 'bar':
      return Math.abs(u) <= 2.6 && Math.abs(v) <= 0.85;
    case 'cross':
      return (Math.abs(u) <= 0.6 && Math.abs(v) <= 2.6) || (Math.abs(v) <= 0.6 && Math.abs(u) <= 2.6);
    default:
      throw new Error(`unknown form ${form}`);
  }
}

const SUPERSAMPLE = 4;

/** Draws one tile into `out` at `offset` (C-order [3,12,12]), consuming draws from `rng` in a fixed order. */
function renderTile(rng: Rng, hue: string, form: string, place: number, out: Float32Array, offset: number): void {
  const right = place % 2 === 1;
  const lower = place >= 2;
  const cx = (right ? 9 : 3) + uniform(rng, -0.6, 0.6);
  const cy = (lower ? 9 : 3) + uniform(rng, -0.6, 0.6);
  const scale = uniform(rng, 0.88, 1.08);
  const angle = uniform(rng, -0.3, 0.3); // radians, about ±17°
  const brightness = uniform(rng, 0.68, 1.0);
  const base = HUE_RGB[hue];
  const colour = base.map((c) => Math.min(1, Math.max(0, c * brightness + uniform(rng, -0.04, 0.04))));
  const background = uniform(rng, 0.03, 0.12);
  const cos = Math.cos(angle);
  const sin = Math.sin(angle);
  const plane = TILE_SIZE * TILE_SIZE;
  for (let y = 0; y < TILE_SIZE; y++) {
    for (let x = 0; x < TILE_SIZE; x++) {
      let covered = 0;
      for (let sy = 0; sy < SUPERSAMPLE; sy++) {
        for (let sx = 0; sx < SUPERSAMPLE; sx++) {
          const dx = x + (sx + 0.5) / SUPERSAMPLE - cx;
          const dy = y + (sy + 0.5) / SUPERSAMPLE - cy;
          const u = (cos * dx + sin * dy) / scale;
          const v = (-sin * dx + cos * dy) / scale;
          if (insideGlyph(form, u, v)) covered++;
        }
      }
      const coverage = covered / (SUPERSAMPLE * SUPERSAMPLE);
      for (let c = 0; c < TILE_CHANNELS; c++) {
        const value = background * (1 - coverage) + colour[c] * coverage + 0.03 * gaussian(rng);
        out[offset + c * plane + y * TILE_SIZE + x] = Math.min(1, Math.max(0, value));
      }
    }
  }
}

/** `count` tiles from `seed`, each family's concept drawn independently and uniformly. */
export function generateTiles(seed: number, count: number): TileSet {
  const rng = mulberry32(seed);
  const tiles = new Float32Array(count * TILE_VALUES);
  const choices = new Int32Array(count * FAMILY_COUNT);
  for (let i = 0; i < count; i++) {
    for (let f = 0; f < FAMILY_COUNT; f++) choices[i * FAMILY_COUNT + f] = randomInt(rng, PER_FAMILY);
    const hue = FAMILIES[0].concepts[choices[i * FAMILY_COUNT]].label;
    const form = FAMILIES[1].concepts[choices[i * FAMILY_COUNT + 1]].label;
    renderTile(rng, hue, form, choices[i * FAMILY_COUNT + 2], tiles, i * TILE_VALUES);
  }
  return { count, tiles, choices };
}
