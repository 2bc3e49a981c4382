/** The geometry statistics at their formulas' known limiting values and on textbook examples. */
import { describe, expect, it } from 'vitest';
import { aurocOf, clusterOrder, cosineMatrix, featureDimensionality, participationRatio, projectDirections, totalInterference } from '../../core/geometry/stats.ts';
import { foldsOf } from '../../core/geometry/probe.ts';
import { probeSizes, summarise } from '../../core/geometry/lens.ts';
import { mulberry32 } from '../../core/random.ts';

const polygon = (k: number, r = 1) => Float64Array.from({ length: 2 * k }, (_, j) => (j % 2 === 0 ? Math.cos : Math.sin)((2 * Math.PI * Math.floor(j / 2)) / k) * r);

describe('feature dimensionality (Elhage et al. 2022)', () => {
  it('regular pentagon in 2-D: 2/5 each; digon (antipodal pair): 1/2; orthogonal: 1; zero: 0', () => {
    // Σ_j cos²(2πj/k) = k/2 for k ≥ 3, so D = 1/(k/2) = 2/k (trigonometric identity, no source needed).
    for (const d of featureDimensionality(polygon(5, 3), 5, 2)) expect(d).toBeCloseTo(0.4, 12);
    for (const d of featureDimensionality(Float64Array.from([2, -2]), 2, 1)) expect(d).toBeCloseTo(0.5, 12);
    expect(Array.from(featureDimensionality(Float64Array.from([1, 0, 0, 0, 2, 0, 0, 0, 0]), 3, 3))).toEqual([1, 1, 0]);
  });
  it('interference: Σ_{j≠i}(ŵ_i·w_j)² is 0 for orthogonal directions and ‖w‖²·(k/2 − 1) on a regular k-gon', () => {
    expect(Array.from(totalInterference(Float64Array.from([1, 0, 0, 1]), 2, 2))).toEqual([0, 0]);
    for (const v of totalInterference(polygon(5), 5, 2)) expect(v).toBeCloseTo(1.5, 12);
  });
  it('cosines of a square: 1 on the diagonal, 0 beside, −1 opposite', () => {
    const c = cosineMatrix(polygon(4), 4, 2);
    expect(c[0]).toBeCloseTo(1, 12);
    expect(c[1]).toBeCloseTo(0, 12);
    expect(c[2]).toBeCloseTo(-1, 12);
  });
});

describe('participation ratio (Gao et al. 2017)', () => {
  it('is the width for an isotropic covariance and 1 for rank one', () => {
    const eye = new Float64Array(16);
    for (let i = 0; i < 4; i++) eye[i * 5] = 2.5;
    expect(participationRatio(eye, 4)).toBeCloseTo(4, 12);
    const v = [1, 2, 3];
    expect(participationRatio(Float64Array.from({ length: 9 }, (_, k) => v[Math.floor(k / 3)] * v[k % 3]), 3)).toBeCloseTo(1, 12);
  });
  it('equals (Σλ)²/Σλ² for known eigenvalues: diag(3, 1) gives 16/10', () => {
    // Rotated by 45°: [[2, 1], [1, 2]] has eigenvalues 3 and 1 (textbook example).
    expect(participationRatio(Float64Array.from([2, 1, 1, 2]), 2)).toBeCloseTo(1.6, 12);
  });
});

describe('AUROC', () => {
  it('is 1 for perfect separation, 0.5 for ties, and counts ties half (Hanley & McNeil 1982)', () => {
    expect(aurocOf([0.1, 0.2, 0.8, 0.9], Uint8Array.from([0, 0, 1, 1]))).toBe(1);
    expect(aurocOf([1, 1, 1, 1], Uint8Array.from([0, 1, 0, 1]))).toBe(0.5);
    // positives {0.5, 0.9}, negatives {0.5, 0.1}: pairs won 3, tied 1 → (3 + 0.5)/4.
    expect(aurocOf([0.5, 0.9, 0.5, 0.1], Uint8Array.from([1, 1, 0, 0]))).toBe(0.875);
  });
});

describe('helpers', () => {
  it('folds: every probe in one fold, sizes differ by at most one, same seed same folds', () => {
    const f = foldsOf(103, 5, 7);
    const sizes = [0, 0, 0, 0, 0];
    for (const v of f) sizes[v]++;
    expect(Math.max(...sizes) - Math.min(...sizes)).toBeLessThanOrEqual(1);
    expect(Array.from(foldsOf(103, 5, 7))).toEqual(Array.from(f));
    expect(Array.from(foldsOf(103, 5, 8))).not.toEqual(Array.from(f));
  });
  it('sparse-probing sizes are powers of two up to the width', () => {
    expect(probeSizes(5)).toEqual([1, 2, 4, 5]);
    expect(probeSizes(8)).toEqual([1, 2, 4, 8]);
    expect(probeSizes(1)).toEqual([1]);
  });
  it('clustering puts near-parallel directions together', () => {
    const dirs = Float64Array.from([1, 0, 0, 1, 0.99, 0.1, 0.05, 1]);
    const order = clusterOrder(cosineMatrix(dirs, 4, 2), 4);
    const pos = (i: number) => order.indexOf(i);
    expect(Math.abs(pos(0) - pos(2))).toBe(1);
    expect(Math.abs(pos(1) - pos(3))).toBe(1);
  });
  it('the projection of 2-D directions keeps their lengths and angles exactly', () => {
    const dirs = polygon(5, 2);
    const p = projectDirections(dirs, 5, 2, mulberry32(1));
    expect(p.kept).toBeCloseTo(1, 9);
    for (let i = 0; i < 5; i++) expect(Math.hypot(p.xy[2 * i], p.xy[2 * i + 1])).toBeCloseTo(2, 9);
  });
  it('summary sentence reads as the issue asks', () => {
    const concept = (locality: 'local' | 'spread' | 'few') => ({ locality, carried: true, kind: 'label' });
    const s = summarise({
      units: 32, effectiveDimensions: 11.2, decodableCount: 18, conceptsPerDimension: 18 / 11.2, dimensionalitySum: 9.5,
      concepts: [...Array(6).fill(concept('local')), ...Array(9).fill(concept('spread'))], mostInterfering: { a: 'red', b: 'round', cosine: 0.71 },
    } as never);
    expect(s).toBe('32 units, about 11.2 effective dimensions, 18 decodable concepts: 1.6 per dimension. 6 are local to one unit, 9 spread over 4 or more units (of 15 carried linearly). Feature dimensionality sums to 9.5 over 32 units. Most interfering pair: red and round (cos 0.71).');
  });
});
