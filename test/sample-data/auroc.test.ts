/** The build's quick AUROC check against @stdlib/stats-ranks and the pairwise definition of the statistic. */
import ranks from '@stdlib/stats-ranks';
import { describe, expect, it } from 'vitest';
import { aurocFromRanks, averageRanks } from '../../sample-data/lib/auroc';
import { mulberry32 } from '../../sample-data/lib/prng';

/** P(score₊ > score₋) + ½ P(tie) over all positive–negative pairs (Mann & Whitney 1947; Hanley & McNeil 1982). */
function pairwiseAuroc(scores: number[], positive: boolean[]): number {
  let wins = 0;
  let pairs = 0;
  for (let i = 0; i < scores.length; i++) {
    if (!positive[i]) continue;
    for (let j = 0; j < scores.length; j++) {
      if (positive[j]) continue;
      pairs++;
      wins += scores[i] > scores[j] ? 1 : scores[i] === scores[j] ? 0.5 : 0;
    }
  }
  return wins / pairs;
}

describe('rank-based AUROC', () => {
  const rng = mulberry32(7);
  // Many exact zeros, like ReLU outputs, so ties matter.
  const scores = Array.from({ length: 300 }, () => Math.max(0, Math.round((rng() - 0.4) * 20) / 4));
  const positive = scores.map((s) => rng() < 0.2 + s / 10);

  it('ranks ties by their average, as @stdlib/stats-ranks does', () => {
    expect([...averageRanks(scores)]).toEqual(ranks(scores, { method: 'average' }));
  });

  it('equals the pairwise definition', () => {
    const got = aurocFromRanks(averageRanks(scores), Uint8Array.from(positive, Number));
    expect(got).toBeCloseTo(pairwiseAuroc(scores, positive), 12);
  });

  it('has the known limiting values: 1 separated, 0 reversed, ½ constant, undefined without both classes', () => {
    const labels = Uint8Array.from([0, 0, 0, 1, 1]);
    expect(aurocFromRanks(averageRanks([1, 2, 3, 4, 5]), labels)).toBe(1);
    expect(aurocFromRanks(averageRanks([5, 4, 3, 2, 1]), labels)).toBe(0);
    expect(aurocFromRanks(averageRanks([2, 2, 2, 2, 2]), labels)).toBe(0.5);
    expect(aurocFromRanks(averageRanks([1, 2, 3]), Uint8Array.from([1, 1, 1]))).toBeNaN();
  });
});
