import hypergeometricCdf from '@stdlib/stats-base-dists-hypergeometric-cdf';
import ranks from '@stdlib/stats-ranks';
import { describe, expect, it } from 'vitest';
import {
  aurocFromRankSum,
  benjaminiHochberg,
  classSelectivityIndex,
  hypergeometricUpperTail,
  intersectionOverUnion,
  leinsterCobbold,
  lnGamma,
  normalizedPmi,
  topSetSize,
} from '../../core/score/stats.ts';
import { seededRandom } from './helpers.ts';

// Benjamini & Hochberg 1995, section 4 example: the 15 p-values (from memory).
const BH_EXAMPLE = [
  0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.324, 0.4262, 0.5719, 0.6528, 0.759, 1.0,
];

/** q_i = min_{j ≥ i} m·p_(j)/j, capped at 1, straight from the definition in O(m²). */
function bhByDefinition(p: number[]): number[] {
  const m = p.length;
  const sorted = p.map((value, index) => ({ value, index })).sort((a, b) => a.value - b.value || a.index - b.index);
  const q = new Array<number>(m);
  sorted.forEach((entry, i) => {
    let best = Infinity;
    for (let j = i; j < m; j++) best = Math.min(best, (m * sorted[j].value) / (j + 1));
    q[entry.index] = Math.min(1, best);
  });
  return q;
}

describe('Benjamini–Hochberg q-values', () => {
  it('rejects exactly the first 4 hypotheses of the 1995 example at FDR 0.05', () => {
    const q = benjaminiHochberg(Float64Array.from(BH_EXAMPLE));
    // Benjamini & Hochberg 1995, section 4: the step-up procedure rejects the four smallest p-values
    expect(Array.from(q, (v) => v <= 0.05)).toEqual(BH_EXAMPLE.map((_, i) => i < 4));
    // hand computation from q_i = min_{j≥i} m·p_(j)/j: q_1 = 15·0.0001/1, q_4 = 15·0.0095/4, q_5 = 15·0.0201/5
    expect(q[0]).toBeCloseTo(0.0015, 15);
    expect(q[3]).toBeCloseTo(0.035625, 15);
    expect(q[4]).toBeCloseTo(0.0603, 15);
    expect(q[14]).toBe(1);
  });

  it('matches the O(m²) definition on the example, shuffled, and on random p-values with ties', () => {
    const random = seededRandom(11);
    const shuffled = [...BH_EXAMPLE].sort(() => random() - 0.5);
    const cases = [BH_EXAMPLE, shuffled, Array.from({ length: 300 }, () => Math.round(random() * 50) / 50)];
    for (const p of cases) {
      const q = benjaminiHochberg(Float64Array.from(p));
      const expected = bhByDefinition(p);
      expected.forEach((value, i) => expect(q[i]).toBeCloseTo(value, 14));
    }
  });

  it('is monotone in p and never exceeds 1', () => {
    const random = seededRandom(3);
    const p = Float64Array.from({ length: 500 }, () => random() ** 3);
    const q = benjaminiHochberg(p);
    const order = Array.from(p.keys()).sort((a, b) => p[a] - p[b]);
    for (let r = 1; r < order.length; r++) expect(q[order[r]]).toBeGreaterThanOrEqual(q[order[r - 1]]);
    for (const v of q) expect(v).toBeLessThanOrEqual(1);
  });
});

describe('AUROC from rank sums', () => {
  it('matches U from @stdlib/stats-ranks average ranks on seeded integer data with many ties', () => {
    const random = seededRandom(7);
    for (let trial = 0; trial < 20; trial++) {
      const n = 50 + Math.floor(random() * 400);
      const x = Array.from({ length: n }, () => Math.floor(random() * 6));
      const positive = x.map(() => random() < 0.3);
      const r = ranks(x, { method: 'average' });
      let rankSum = 0;
      let n1 = 0;
      positive.forEach((isPositive, i) => {
        if (isPositive) {
          rankSum += r[i];
          n1++;
        }
      });
      const n0 = n - n1;
      // Mann & Whitney 1947: U = R1 − n1(n1+1)/2; AUROC = U/(n1·n0) (Hanley & McNeil 1982)
      const reference = (rankSum - (n1 * (n1 + 1)) / 2) / (n1 * n0);
      expect(Math.abs(aurocFromRankSum(rankSum, n1, n0) - reference)).toBeLessThan(1e-12);
      // and the pairwise definition P(X1 > X0) + ½ P(X1 = X0)
      let wins = 0;
      for (let i = 0; i < n; i++) {
        if (!positive[i]) continue;
        for (let j = 0; j < n; j++) if (!positive[j]) wins += x[i] > x[j] ? 1 : x[i] === x[j] ? 0.5 : 0;
      }
      expect(Math.abs(reference - wins / (n1 * n0))).toBeLessThan(1e-12);
    }
  });

  it('is 0.5 when one class is empty (our convention, from the brief)', () => {
    expect(aurocFromRankSum(0, 0, 10)).toBe(0.5);
    expect(aurocFromRankSum(55, 10, 0)).toBe(0.5);
  });
});

/** Exact P(X ≥ x) from the definition Σ_k C(K,k)C(N−K,n−k)/C(N,n) in BigInt arithmetic. */
function exactUpperTail(x: number, population: number, successes: number, draws: number): number {
  const choose = (n: number, k: number): bigint => {
    if (k < 0 || k > n) return 0n;
    let result = 1n;
    for (let i = 0; i < k; i++) result = (result * BigInt(n - i)) / BigInt(i + 1);
    return result;
  };
  let numerator = 0n;
  for (let k = x; k <= Math.min(successes, draws); k++) numerator += choose(successes, k) * choose(population - successes, draws - k);
  const denominator = choose(population, draws);
  if (numerator === 0n) return 0;
  const shift = BigInt(denominator.toString(2).length - numerator.toString(2).length + 64);
  return Number((numerator << shift) / denominator) / 2 ** Number(shift);
}

describe('hypergeometric upper tail', () => {
  it('gives the hand-computed small cases', () => {
    // N = 10, K = 4, n = 3: C(10,3) = 120; P(X≥2) = (C(4,2)C(6,1) + C(4,3)C(6,0))/120 = 40/120
    expect(hypergeometricUpperTail(2, 10, 4, 3)).toBeCloseTo(1 / 3, 14);
    expect(hypergeometricUpperTail(3, 10, 4, 3)).toBeCloseTo(1 / 30, 14); // C(4,3)/120
    expect(hypergeometricUpperTail(1, 10, 4, 3)).toBeCloseTo(1 - 20 / 120, 14); // 1 − C(6,3)/120
    expect(hypergeometricUpperTail(0, 10, 4, 3)).toBe(1);
    expect(hypergeometricUpperTail(4, 10, 4, 3)).toBe(0); // more hits than draws is impossible
    // N = 5, K = 2, n = 4: at least one success is certain (only 3 failures)
    expect(hypergeometricUpperTail(1, 5, 2, 4)).toBe(1);
  });

  it('matches 1 − cdf(x − 1) of @stdlib/stats-base-dists-hypergeometric-cdf for moderate values', () => {
    const random = seededRandom(5);
    for (let trial = 0; trial < 300; trial++) {
      const population = 20 + Math.floor(random() * 3000);
      const successes = 1 + Math.floor(random() * (population - 1));
      const draws = 1 + Math.floor(random() * Math.min(200, population - 1));
      const x = Math.floor(random() * (Math.min(successes, draws) + 2));
      const reference = x <= 0 ? 1 : 1 - hypergeometricCdf(x - 1, population, successes, draws);
      expect(Math.abs(hypergeometricUpperTail(x, population, successes, draws) - reference)).toBeLessThan(1e-9);
    }
  });

  it('keeps relative precision in the far tail (exact BigInt sum from the definition)', () => {
    for (const [x, population, successes, draws] of [
      [90, 3000, 750, 150],
      [150, 3000, 750, 150],
      [40, 20000, 700, 100],
      [12, 200, 30, 20],
    ]) {
      const exact = exactUpperTail(x, population, successes, draws);
      const ours = hypergeometricUpperTail(x, population, successes, draws);
      expect(exact).toBeGreaterThan(0);
      expect(Math.abs(ours - exact) / exact).toBeLessThan(1e-9);
    }
  });
});

describe('log-gamma', () => {
  it('gives ln((n−1)!) for integers and ln √π at 1/2', () => {
    let lnFactorial = 0;
    for (let n = 1; n <= 170; n++) {
      // Γ(n) = (n−1)! (definition of the gamma function at integers)
      expect(Math.abs(lnGamma(n) - lnFactorial)).toBeLessThan(1e-12 * Math.max(1, lnFactorial));
      lnFactorial += Math.log(n);
    }
    expect(lnGamma(0.5)).toBeCloseTo(0.5 * Math.log(Math.PI), 13); // Γ(1/2) = √π
  });
});

describe('Leinster–Cobbold diversity', () => {
  const p = Float64Array.from([0.5, 0.25, 0.25]);
  const identity = Float64Array.from([1, 0, 0, 0, 1, 0, 0, 0, 1]);
  it('reduces to Hill numbers with the identity similarity (Leinster & Cobbold 2012; Hill 1973)', () => {
    expect(leinsterCobbold(p, identity, 0)).toBeCloseTo(3, 12); // richness
    expect(leinsterCobbold(p, identity, 1)).toBeCloseTo(2 ** 1.5, 12); // exp(Shannon) = exp(1.5 ln 2)
    expect(leinsterCobbold(p, identity, 2)).toBeCloseTo(8 / 3, 12); // 1/Σp² = 1/0.375
    expect(leinsterCobbold(p, identity, Infinity)).toBeCloseTo(2, 12); // 1/max p
  });
  it('is 1 for the all-ones similarity at every order (Leinster & Cobbold 2012)', () => {
    const ones = new Float64Array(9).fill(1);
    for (const q of [0, 0.5, 1, 2, 5, Infinity]) expect(leinsterCobbold(p, ones, q)).toBeCloseTo(1, 12);
  });
  it('counts one, related and unrelated drivers', () => {
    expect(leinsterCobbold(Float64Array.from([1]), Float64Array.from([1]), 1)).toBe(1);
    // two drivers with Z off-diagonal 0.5 and equal shares: (Zp)_i = 0.75, D_1 = exp(−ln 0.75) = 4/3 (by hand)
    const related = leinsterCobbold(Float64Array.from([0.5, 0.5]), Float64Array.from([1, 0.5, 0.5, 1]), 1);
    expect(related).toBeCloseTo(4 / 3, 12);
    for (const q of [0, 2, Infinity]) {
      const d = leinsterCobbold(Float64Array.from([0.5, 0.5]), Float64Array.from([1, 0.5, 0.5, 1]), q);
      expect(d).toBeGreaterThan(1);
      expect(d).toBeLessThan(2);
    }
    const third = 1 / 3;
    expect(leinsterCobbold(Float64Array.from([third, third, third]), identity, 1)).toBeCloseTo(3, 12);
  });
  it('is 0 with no drivers (our convention)', () => {
    expect(leinsterCobbold(new Float64Array(0), new Float64Array(0), 1)).toBe(0);
  });
});

describe('class selectivity index', () => {
  it('is 1 for a unit that responds to one label only and 0 for equal means (Morcos et al. 2018)', () => {
    expect(classSelectivityIndex(Float64Array.from([0, 3.5, 0, 0]))).toBe(1);
    expect(classSelectivityIndex(Float64Array.from([2, 2, 2]))).toBe(0);
    expect(classSelectivityIndex(Float64Array.from([0, 0, 0]))).toBe(0); // 0/0 → 0 (brief)
    // (3 − 1)/(3 + 1) with μ_−max = mean(1, 1): by hand
    expect(classSelectivityIndex(Float64Array.from([1, 3, 1]))).toBeCloseTo(0.5, 15);
    expect(classSelectivityIndex(Float64Array.from([NaN, 4, 0]))).toBe(1); // labels without probes are skipped
  });
});

describe('small formulas', () => {
  it('NPMI limits (Bouma 2009): −1 never together, 0 independent, 1 always together', () => {
    expect(normalizedPmi(0, 10, 10, 100)).toBe(-1);
    expect(normalizedPmi(25, 50, 50, 100)).toBeCloseTo(0, 15); // p_ab = p_a p_b
    expect(normalizedPmi(40, 40, 40, 100)).toBeCloseTo(1, 15); // perfect co-occurrence
  });
  it('IoU and top-set size', () => {
    expect(intersectionOverUnion(2, 4, 3)).toBeCloseTo(2 / 5, 15); // Jaccard 1912
    expect(intersectionOverUnion(0, 0, 0)).toBe(0);
    // max(20, ceil(0.005·N)) (Network Dissection top 0.5%, Bau et al. 2017)
    expect(topSetSize(20000, 0.005, 20)).toBe(100);
    expect(topSetSize(1000, 0.005, 20)).toBe(20);
    expect(topSetSize(10, 0.005, 20)).toBe(10);
  });
});
