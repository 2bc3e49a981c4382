/**
 * Planted activations, no model: three unrelated label families and units built to be mono-, bi- and
 * tri-semantic, related-bisemantic, dead and dense. The expected ranking and counts follow from the construction
 * and the definitions (Leinster & Cobbold 2012 for the counts), not from running the code.
 */
import { describe, expect, it } from 'vitest';
import {
  buildRelatedness,
  createScratch,
  defaultScoreOptions,
  finishLayer,
  rankUnits,
  scoreUnitPartial,
} from '../../core/score/index.ts';
import type { ConceptRow } from '../../core/probes/types.ts';
import type { ScoreOptions } from '../../core/score/types.ts';
import { labelMatrixOf, seededNormal, seededRandom } from './helpers.ts';

const FAMILIES: Record<string, string[]> = {
  tint: ['amber', 'teal', 'violet', 'ochre'],
  outline: ['disc', 'wedge', 'ring', 'bar'],
  place: ['upper', 'lower', 'inner', 'outer'],
};
const LABELS = Object.values(FAMILIES).flat();
const CONCEPTS: ConceptRow[] = Object.entries(FAMILIES).flatMap(([group, names]) => names.map((label) => ({ label, group })));
const PROBES = 3000;

function build() {
  const random = seededRandom(2024);
  const normal = seededNormal(random);
  const rows = Array.from({ length: PROBES }, () => Object.values(FAMILIES).map((names) => names[Math.floor(random() * 4)]));
  const labels = labelMatrixOf(LABELS, rows);
  const has = (i: number, name: string) => rows[i].includes(name);
  const relu = (x: number) => Math.max(0, x);
  const units: ((i: number) => number)[] = [
    (i) => relu(3 * +has(i, 'amber') + 0.3 * normal()), // 0: one concept
    (i) => relu(3 * +has(i, 'amber') + 3 * +has(i, 'disc') + 0.3 * normal()), // 1: two unrelated
    (i) => relu(3 * +has(i, 'amber') + 3 * +has(i, 'teal') + 0.3 * normal()), // 2: two of one family
    (i) => relu(3 * +has(i, 'amber') + 3 * +has(i, 'disc') + 3 * +has(i, 'upper') + 0.3 * normal()), // 3: three unrelated
    () => 0, // 4: dead
    () => 2 + 0.01 * normal(), // 5: dense
  ];
  // top 5% (150 probes) so each planted label has enough hits for BH over the whole layer
  const opts: ScoreOptions = { ...defaultScoreOptions, topQuantile: 0.05 };
  const scratch = createScratch(labels);
  const partials = units.map((activation, unit) =>
    scoreUnitPartial(unit, Float32Array.from({ length: PROBES }, (_, i) => activation(i)), labels, opts, scratch),
  );
  const relatedness = buildRelatedness(LABELS, labels, CONCEPTS, null, { wordnet: false });
  const scores = finishLayer(partials, relatedness, opts);
  return { scores, relatedness };
}

const { scores, relatedness } = build();
const driverNames = (unit: number) => scores[unit].drivers.map((d) => LABELS[d.label]).sort();

describe('planted units', () => {
  it('finds exactly the planted drivers', () => {
    expect(driverNames(0)).toEqual(['amber']);
    expect(driverNames(1)).toEqual(['amber', 'disc']);
    expect(driverNames(2)).toEqual(['amber', 'teal']);
    expect(driverNames(3)).toEqual(['amber', 'disc', 'upper']);
    expect(driverNames(4)).toEqual([]);
    expect(driverNames(5)).toEqual([]);
  });

  it('flags the dead and the dense unit and no other', () => {
    expect(scores.map((s) => s.flags)).toEqual([[], [], [], [], ['dead'], ['dense']]);
    expect(scores[4].explanation).toBeNull();
  });

  it('counts concepts ≈ 1, ≈ 2, in (1, 2), ≈ 3 and 0 (Leinster & Cobbold 2012, order 1)', () => {
    expect(relatedness.matrix[LABELS.indexOf('amber') * LABELS.length + LABELS.indexOf('teal')]).toBe(0.5); // same group
    expect(scores[0].conceptCount).toBeCloseTo(1, 12); // one driver: D = 1 exactly
    expect(Math.abs(scores[1].conceptCount - 2)).toBeLessThan(0.02); // two unrelated, near-equal shares
    // two drivers with Z = 0.5 and shares near ½: D_1 near 4/3 (exact at equal shares)
    expect(scores[2].conceptCount).toBeGreaterThan(1);
    expect(scores[2].conceptCount).toBeLessThan(2);
    expect(Math.abs(scores[2].conceptCount - 4 / 3)).toBeLessThan(0.05);
    expect(Math.abs(scores[3].conceptCount - 3)).toBeLessThan(0.05);
    expect(scores[4].conceptCount).toBe(0);
    expect(scores[5].conceptCount).toBe(0);
  });

  it('ranks three, two unrelated, two related, one, then the flagged units', () => {
    const ranked = rankUnits(scores.map((score) => ({ score })));
    expect(ranked.map((item) => item.score.unit)).toEqual([3, 1, 2, 0, 4, 5]);
  });

  it('builds the related unit\'s formula from its two drivers, binarised where IoU is best', () => {
    // the unit is 3·amber + 3·teal + noise: above ≈1.5 exactly the probes with amber or teal, so IoU ≈ 1
    const explanation = scores[2].explanation!;
    expect(explanation.basis).toBe('drivers');
    expect(explanation.terms.map((t) => t.map((l) => LABELS[l])).sort()).toEqual([['amber'], ['teal']]);
    expect(explanation.iou).toBeGreaterThan(0.99);
  });
});
