import { describe, expect, it } from 'vitest';
import { prepareLabels } from '../../core/score/labels.ts';
import { labelMatrixOf, seededRandom } from './helpers.ts';

/** Pair and triple counts by direct set intersection (definition), for the dense and the on-demand tables. */
describe('prepareLabels counts', () => {
  for (const labelTotal of [12, 60, 1100]) {
    it(`matches explicit intersections with ${labelTotal} labels`, () => {
      const random = seededRandom(labelTotal);
      const names = Array.from({ length: labelTotal }, (_, i) => `k${i}`);
      // a few frequent labels so that pairs and triples actually overlap
      const pick = () => Math.floor(random() ** 3 * labelTotal);
      const rows = Array.from({ length: 600 }, () => {
        const chosen = new Set<number>();
        const k = 1 + Math.floor(random() * 5);
        while (chosen.size < k) chosen.add(pick());
        return [...chosen].map((l) => names[l]);
      });
      const prepared = prepareLabels(labelMatrixOf(names, rows));
      const sets = names.map((name) => new Set(rows.flatMap((row, i) => (row.includes(name) ? [i] : []))));
      const both = (a: number, b: number) => [...sets[a]].filter((i) => sets[b].has(i));
      for (let trial = 0; trial < 400; trial++) {
        const [a, b, c] = [pick(), pick(), pick()].sort((x, y) => x - y);
        if (a === b || b === c) continue;
        expect(prepared.pairCount(a, b)).toBe(both(a, b).length);
        expect(prepared.pairCount(b, c)).toBe(both(b, c).length);
        expect(prepared.tripleCount(a, b, c)).toBe(both(a, b).filter((i) => sets[c].has(i)).length);
      }
      sets.forEach((set, l) => expect(prepared.labelCount[l]).toBe(set.size));
    });
  }
});
