/**
 * The joint driver model on planted units (test/support/joint-fixtures.ts): a conjunction, either-or of two common
 * and of two rare labels, a common with a rare label, a graded shift, a modulator, a nested superset, and dense, dead
 * and noise-only units. Expected drivers, counts and formulas follow from the construction (weights set by hand);
 * the count limits from Leinster & Cobbold 2012 (one driver → 1, two unrelated equal drivers → 2).
 */
import { describe, expect, it } from 'vitest';
import { buildRelatedness, createScratch, defaultScoreOptions, finishLayer, scoreUnitPartial } from '../../core/score/index.ts';
import { JOINT_CASES, JOINT_LABELS, jointActivations, jointProbes } from '../support/joint-fixtures.ts';
import { labelMatrixOf } from './helpers.ts';

const { rows, labels, width } = jointProbes(6000, 11);
const matrix = labelMatrixOf(JOINT_LABELS, labels);
const scratch = createScratch(matrix);
const partials = jointActivations(rows, width).map((values, u) => scoreUnitPartial(u, values, matrix, defaultScoreOptions, scratch));
const scores = finishLayer(partials, buildRelatedness(JOINT_LABELS, matrix, null, null, { wordnet: false }), defaultScoreOptions);
const name = (ls: number[]) => ls.map((l) => JOINT_LABELS[l]).join(' & ');

describe('joint model on planted units', () => {
  JOINT_CASES.forEach((c, u) => {
    it(`${c.name}: drivers ${c.drivers.join(', ') || 'none'}, count in [${c.count}], formula ${c.formula ?? '—'}`, () => {
      const s = scores[u];
      expect(s.flags).toEqual(c.flags ?? []);
      expect(s.drivers.map((d) => name(d.labels)).sort()).toEqual([...c.drivers].sort());
      expect(s.modulators.map((m) => JOINT_LABELS[m.label]).sort()).toEqual([...(c.modulators ?? [])].sort());
      expect(s.nested.map((x) => JOINT_LABELS[x.label]).sort()).toEqual([...(c.nested ?? [])].sort());
      expect(s.conceptCount).toBeGreaterThanOrEqual(c.count[0] - 1e-9);
      expect(s.conceptCount).toBeLessThanOrEqual(c.count[1] + 1e-9);
      if (c.drivers.length) {
        expect(s.drivers.reduce((t, d) => t + d.share, 0)).toBeCloseTo(1, 12);
        for (const d of s.drivers) {
          expect(d.shareLow).toBeLessThanOrEqual(d.share);
          expect(d.shareHigh).toBeGreaterThanOrEqual(d.share);
        }
        expect(s.conceptLow).toBeLessThanOrEqual(s.conceptCount);
        expect(s.conceptHigh).toBeGreaterThanOrEqual(s.conceptCount);
      }
      if (c.formula === null) {
        if (s.explanation) expect(s.explanation.basis).toBe('top set');
      } else {
        const terms = s.explanation!.terms.map(name).sort();
        expect(s.explanation!.basis).toBe('drivers');
        expect(terms).toEqual(c.formula.split(' | ').sort());
        expect(s.explanation!.iou).toBeGreaterThanOrEqual(c.minIou);
      }
    });
  });
});
