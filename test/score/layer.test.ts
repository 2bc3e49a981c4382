import { describe, expect, it } from 'vitest';
import { SkeinError } from '../../core/errors.ts';
import {
  buildRelatedness,
  createScratch,
  defaultScoreOptions,
  finishLayer,
  rankUnits,
  scoreUnitPartial,
} from '../../core/score/index.ts';
import type { UnitScore } from '../../core/score/types.ts';
import { labelMatrixOf, seededRandom } from './helpers.ts';

/** q_i = min_{j ≥ i} m·p_(j)/j capped at 1 (Benjamini & Hochberg 1995), by the O(m²) definition. */
function bhByDefinition(p: number[]): number[] {
  const order = p.map((_, i) => i).sort((a, b) => p[a] - p[b] || a - b);
  const q = new Array<number>(p.length);
  order.forEach((index, r) => {
    let best = Infinity;
    for (let j = r; j < order.length; j++) best = Math.min(best, (p.length * p[order[j]]) / (j + 1));
    q[index] = Math.min(1, best);
  });
  return q;
}

function layer() {
  const random = seededRandom(31);
  const names = ['north', 'south', 'east', 'west', 'every'];
  const rows = Array.from({ length: 1200 }, () => [names[Math.floor(random() * 4)], 'every']); // "every" is on all probes
  const labels = labelMatrixOf(names, rows);
  const scratch = createScratch(labels);
  const partials = Array.from({ length: 12 }, (_, unit) => {
    const target = names[unit % 4];
    const values = Float32Array.from({ length: 1200 }, (_, i) =>
      unit === 11 ? 0 : Math.max(0, (rows[i][0] === target ? unit / 5 : 0) + random() - 0.5),
    );
    return scoreUnitPartial(unit, values, labels, defaultScoreOptions, scratch);
  });
  return { partials, scores: finishLayer(partials, buildRelatedness(names, labels, null, null, { wordnet: false }), defaultScoreOptions) };
}

describe('finishLayer', () => {
  const { partials, scores } = layer();

  it('pools all unit × label tests of the live units into one BH family', () => {
    const pooled: number[] = [];
    const where: [number, number][] = [];
    partials.forEach((partial, u) => {
      if (u === 11) return; // dead (all zero): not tested
      for (let l = 0; l < 4; l++) {
        pooled.push(partial.p[l]);
        where.push([u, l]);
      }
    });
    const expected = bhByDefinition(pooled);
    where.forEach(([u, l], k) => expect(scores[u].stats[l].q).toBeCloseTo(expected[k], 14));
    // a label on every probe cannot be tested; nor can any label of a dead unit
    for (const score of scores) expect(score.stats[4].q).toBe(1);
    expect(scores[11].flags).toEqual(['dead']);
    expect(scores[11].stats.every((s) => s.q === 1)).toBe(true);
    expect(scores[11].drivers).toEqual([]);
  });

  it('has drivers that pass both thresholds, with shares summing to 1 and evidence Σ −log10 q', () => {
    for (const score of scores) {
      let evidence = 0;
      for (const d of score.drivers) {
        expect(d.q).toBeLessThanOrEqual(0.05);
        expect(d.auroc).toBeGreaterThanOrEqual(0.75);
        evidence += -Math.log10(d.q);
      }
      if (score.drivers.length) expect(score.drivers.reduce((s, d) => s + d.share, 0)).toBeCloseTo(1, 12);
      expect(score.evidence).toBeCloseTo(evidence, 9);
    }
    expect(scores[10].drivers.map((d) => d.label)).toEqual([2]); // strongest planted unit: "east"
  });

  it('finds the planted driver and nothing else (known answer by construction)', () => {
    // Unit u fires by u/5 on probes of names[u % 4] plus noise in [−0.5, 0.5): no other label moves it, so no other label
    // may be a driver (precision). From u = 5 on, the target's values lie in [0.5, 1.5 + …) and every other probe's in
    // [0, 0.5): the classes separate completely (AUROC 1) on 1200 probes, so the target must be found (recall).
    for (let u = 0; u < 11; u++) {
      const labels = scores[u].drivers.map((d) => d.label);
      for (const l of labels) expect(l, `unit ${u}`).toBe(u % 4);
      if (u >= 5) expect(labels, `unit ${u}`).toEqual([u % 4]);
    }
  });

  it('refuses a relatedness table of another label set', () => {
    const other = labelMatrixOf(['a', 'b'], [['a'], ['b']]);
    const attempt = () => finishLayer(partials, buildRelatedness(['a', 'b'], other, null, null, { wordnet: false }), defaultScoreOptions);
    expect(attempt).toThrow(SkeinError);
  });
});

describe('rankUnits', () => {
  const score = (unit: number, conceptCount: number, evidence: number, flags: UnitScore['flags'] = []) =>
    ({ unit, conceptCount, evidence, flags }) as UnitScore;

  it('puts unflagged first, then concept count, evidence, layer order and unit index (our ranking)', () => {
    const items = [
      { name: 'dead', score: score(0, 0, 0, ['dead']) },
      { name: 'dense-two', score: score(1, 2, 50, ['dense']) },
      { name: 'one', score: score(2, 1, 9) },
      { name: 'two-weak', score: score(3, 2 + 5e-10, 3) }, // within 1e-9 of 2: a tie on count
      { name: 'two-strong', score: score(4, 2, 8) },
      { name: 'two-strong-later-layer', score: score(0, 2, 8), layerOrder: 1 },
      { name: 'two-strong-first-layer', score: score(7, 2, 8), layerOrder: 0 },
    ];
    expect(rankUnits(items).map((item) => item.name)).toEqual([
      'two-strong', 'two-strong-first-layer', 'two-strong-later-layer', 'two-weak', 'one', 'dense-two', 'dead',
    ]);
    expect(items[0].name).toBe('dead'); // input untouched
  });
});
