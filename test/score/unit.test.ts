import hypergeometricCdf from '@stdlib/stats-base-dists-hypergeometric-cdf';
import ranks from '@stdlib/stats-ranks';
import { describe, expect, it } from 'vitest';
import { SkeinError } from '../../core/errors.ts';
import { createScratch, defaultScoreOptions, prepareLabels, scoreUnitPartial } from '../../core/score/index.ts';
import type { LabelMatrix, ScoreOptions } from '../../core/score/types.ts';
import { labelMatrixOf, seededRandom } from './helpers.ts';

function randomMatrix(probeCount: number, labelTotal: number, random: () => number): LabelMatrix {
  const names = Array.from({ length: labelTotal }, (_, i) => `mark${i}`);
  const rows: string[][] = [];
  for (let i = 0; i < probeCount; i++) {
    const row: string[] = [];
    for (let l = 0; l < labelTotal; l++) if (random() < 0.25) row.push(names[l]);
    rows.push(row);
  }
  return labelMatrixOf(names, rows);
}

function probesWith(matrix: LabelMatrix, label: number): boolean[] {
  const has = new Array<boolean>(matrix.count).fill(false);
  for (let i = 0; i < matrix.count; i++) {
    for (let j = matrix.labelOffsets[i]; j < matrix.labelOffsets[i + 1]; j++) if (matrix.labelIds[j] === label) has[i] = true;
  }
  return has;
}

function thrown(action: () => unknown): SkeinError {
  try {
    action();
  } catch (e) {
    if (e instanceof SkeinError) return e;
    throw e;
  }
  throw new Error('expected a SkeinError');
}

describe('scoreUnitPartial (pass 1)', () => {
  it('AUROC per label equals U/(n1·n0) from @stdlib/stats-ranks average ranks, on integer data with many ties', () => {
    const random = seededRandom(42);
    const matrix = randomMatrix(900, 8, random);
    const scratch = createScratch(matrix);
    for (let unit = 0; unit < 5; unit++) {
      const x = Array.from({ length: matrix.count }, () => Math.floor(random() * 7) - 3); // negatives, zeros, ties
      const partial = scoreUnitPartial(unit, Float32Array.from(x), matrix, defaultScoreOptions, scratch);
      const r = ranks(x, { method: 'average' });
      for (let l = 0; l < 8; l++) {
        const has = probesWith(matrix, l);
        let rankSum = 0;
        let n1 = 0;
        let sumWith = 0;
        let sumWithout = 0;
        has.forEach((h, i) => {
          if (h) {
            rankSum += r[i];
            n1++;
            sumWith += x[i];
          } else sumWithout += x[i];
        });
        const n0 = matrix.count - n1;
        // Mann & Whitney 1947 U from mid-ranks; AUROC = U/(n1·n0) (Hanley & McNeil 1982)
        expect(Math.abs(partial.auroc[l] - (rankSum - (n1 * (n1 + 1)) / 2) / (n1 * n0))).toBeLessThan(1e-12);
        expect(partial.meanWith[l]).toBeCloseTo(sumWith / n1, 12); // arithmetic means
        expect(partial.meanWithout[l]).toBeCloseTo(sumWithout / n0, 12);
      }
    }
  });

  it('orders probes highest first with ties by probe index, negative values and -0 included', () => {
    const random = seededRandom(9);
    const matrix = randomMatrix(500, 3, random);
    const values = Float32Array.from({ length: 500 }, () => {
      const u = random();
      return u < 0.1 ? -0 : u < 0.2 ? 0 : Math.round((u - 0.6) * 40) / 4; // many ties, both signs
    });
    const opts: ScoreOptions = { ...defaultScoreOptions, topExamples: 500 };
    const partial = scoreUnitPartial(0, values, matrix, opts);
    const min = Math.min(...values);
    // reference: Array.prototype.sort by (value desc, index asc), dropping probes at the floor (our definition)
    const expected = Array.from(values.keys())
      .filter((i) => values[i] > min + 1e-6 * (1 + Math.max(Math.abs(min), Math.abs(Math.max(...values)))))
      .sort((a, b) => values[b] - values[a] || a - b);
    expect(Array.from(partial.topProbes)).toEqual(expected);
    expect(Array.from(partial.topValues)).toEqual(expected.map((i) => values[i]));
  });

  it('p is the hypergeometric tail of the top-set hits (@stdlib/stats-base-dists-hypergeometric-cdf)', () => {
    const random = seededRandom(77);
    const matrix = randomMatrix(2000, 6, random);
    const values = Float32Array.from({ length: 2000 }, () => random());
    const partial = scoreUnitPartial(0, values, matrix, defaultScoreOptions);
    expect(partial.topCount).toBe(20); // max(20, ceil(0.005·2000) = 10)
    for (let l = 0; l < 6; l++) {
      const x = partial.topHits[l];
      const reference = x === 0 ? 1 : 1 - hypergeometricCdf(x - 1, 2000, partial.labelCount[l], 20);
      expect(Math.abs(partial.p[l] - reference)).toBeLessThan(1e-10);
    }
  });

  it('keeps probes at the floor out of the top set; a constant unit has no active probe', () => {
    const matrix = labelMatrixOf(['on', 'off'], Array.from({ length: 100 }, (_, i) => [i < 5 ? 'on' : 'off']));
    const sparse = Float32Array.from({ length: 100 }, (_, i) => (i < 5 ? 2 : 0));
    const partial = scoreUnitPartial(0, sparse, matrix, defaultScoreOptions);
    expect(partial.topCount).toBe(5); // not 20: the 15 zero probes are not top activations
    expect(partial.activeFraction).toBe(0.05);
    expect(partial.topMass[0]).toBe(10); // Σ (a_i − min_a) over the 5 active probes
    const constant = scoreUnitPartial(1, new Float32Array(100).fill(0.3), matrix, defaultScoreOptions);
    expect(constant.activeFraction).toBe(0);
    expect(constant.topCount).toBe(0);
    expect(constant.explanation).toBeNull();
    expect(constant.topProbes.length).toBe(0);
    expect(Array.from(constant.auroc)).toEqual([0.5, 0.5]); // all ties: U = n1·n0/2
  });

  it('selectivity shifts negative activations so that one responding label gives 1 (Morcos et al. 2018 limit)', () => {
    const matrix = labelMatrixOf(['x', 'y', 'z'], Array.from({ length: 90 }, (_, i) => [['x', 'y', 'z'][i % 3]]));
    const values = Float32Array.from({ length: 90 }, (_, i) => (i % 3 === 1 ? 1 : -1));
    expect(scoreUnitPartial(0, values, matrix, defaultScoreOptions).selectivity).toBe(1);
    const flat = Float32Array.from({ length: 90 }, (_, i) => i % 2); // every label has mean 0.5
    expect(scoreUnitPartial(0, flat, matrix, defaultScoreOptions).selectivity).toBeCloseTo(0, 12);
  });

  it('gives the same result with a reused scratch as with a fresh one', () => {
    const random = seededRandom(4);
    const matrix = randomMatrix(700, 5, random);
    const scratch = createScratch(prepareLabels(matrix));
    for (let unit = 0; unit < 4; unit++) {
      const values = Float32Array.from({ length: 700 }, () => Math.max(0, random() - 0.5));
      expect(scoreUnitPartial(unit, values, matrix, defaultScoreOptions, scratch)).toEqual(
        scoreUnitPartial(unit, values, matrix, defaultScoreOptions),
      );
    }
  });

  it('rebuilds a scratch made for another probe set instead of reusing its counts', () => {
    const random = seededRandom(12);
    const first = randomMatrix(300, 4, random);
    const second = randomMatrix(500, 6, random);
    const scratch = createScratch(first);
    const values = Float32Array.from({ length: 500 }, () => random());
    expect(scoreUnitPartial(0, values, second, defaultScoreOptions, scratch)).toEqual(
      scoreUnitPartial(0, values, second, defaultScoreOptions),
    );
  });

  it('reports bad input as SkeinErrors naming the field', () => {
    const matrix = labelMatrixOf(['a', 'b'], [['a'], ['b'], ['a', 'b']]);
    const nan = thrown(() => scoreUnitPartial(3, Float32Array.from([1, NaN, 0]), matrix, defaultScoreOptions));
    expect(nan.code).toBe('model');
    expect(nan.where).toBe('unit 3, probe 1');
    expect(thrown(() => scoreUnitPartial(0, new Float32Array(2), matrix, defaultScoreOptions)).code).toBe('request');
    const option = thrown(() => scoreUnitPartial(0, new Float32Array(3), matrix, { ...defaultScoreOptions, topQuantile: 0 }));
    expect([option.code, option.where]).toEqual(['request', 'topQuantile']);
    const twice = labelMatrixOf(['a', 'b'], [['a', 'a'], ['b']]);
    const duplicate = thrown(() => scoreUnitPartial(0, new Float32Array(2), twice, defaultScoreOptions));
    expect([duplicate.code, duplicate.where]).toEqual(['probes', 'probe 0']);
  });
});
