import { describe, expect, it } from 'vitest';
import { createScratch, defaultScoreOptions, scoreUnitPartial } from '../../core/score/index.ts';
import type { ScoreOptions } from '../../core/score/types.ts';
import { labelMatrixOf, seededRandom } from './helpers.ts';

/** Best OR-formula by brute force over all label subsets of size 1–3, with IoU from explicit sets (Mu & Andreas 2020 definition). */
function bruteForce(labelSets: Set<number>[], top: Set<number>, labelTotal: number) {
  let best = { labels: [] as number[], iou: -1 };
  const consider = (labels: number[]) => {
    const union = new Set<number>();
    for (const l of labels) for (const probe of labelSets[l]) union.add(probe);
    let inter = 0;
    for (const probe of union) if (top.has(probe)) inter++;
    const iou = inter / (top.size + union.size - inter);
    if (iou > best.iou + 1e-12) best = { labels, iou };
  };
  for (let a = 0; a < labelTotal; a++) {
    consider([a]);
    for (let b = a + 1; b < labelTotal; b++) {
      consider([a, b]);
      for (let c = b + 1; c < labelTotal; c++) consider([a, b, c]);
    }
  }
  return best;
}

function randomLabels(probeCount: number, labelTotal: number, random: () => number, perProbe: number) {
  const names = Array.from({ length: labelTotal }, (_, i) => `tag${i}`);
  const rows: string[][] = [];
  for (let i = 0; i < probeCount; i++) {
    const chosen = new Set<number>();
    const k = 1 + Math.floor(random() * perProbe);
    while (chosen.size < k) chosen.add(Math.floor(random() * labelTotal));
    rows.push([...chosen].map((l) => names[l]));
  }
  return labelMatrixOf(names, rows);
}

describe('compositional explanation (OR of up to 3 labels, Mu & Andreas 2020)', () => {
  it('finds {A, B} with IoU 1 when the top set is exactly the probes with A or B (hand-made case)', () => {
    const labels = labelMatrixOf(['A', 'B', 'C', 'D'], [
      ['A'], ['A', 'C'], ['B'], ['B', 'D'], ['C'], ['C', 'D'], ['D'], ['C'], ['D'], ['C', 'D'], ['D'], ['C'],
    ]);
    const values = Float32Array.from({ length: 12 }, (_, i) => (i < 4 ? 5 : 0));
    const opts: ScoreOptions = { ...defaultScoreOptions, minTopCount: 4, topQuantile: 0.01 };
    const partial = scoreUnitPartial(0, values, labels, opts);
    expect(partial.topCount).toBe(4);
    expect(partial.explanation).toEqual({ labels: [0, 1], iou: 1 });
  });

  it('agrees with brute force over all formulas on random label sets (exhaustive branch)', () => {
    const random = seededRandom(21);
    for (let trial = 0; trial < 15; trial++) {
      const labelTotal = 6 + Math.floor(random() * 10);
      const probeCount = 120 + Math.floor(random() * 200);
      const labels = randomLabels(probeCount, labelTotal, random, 3);
      const values = Float32Array.from({ length: probeCount }, () => (random() < 0.6 ? 0 : random()));
      const opts: ScoreOptions = { ...defaultScoreOptions, minTopCount: 10 + Math.floor(random() * 30), topExamples: probeCount };
      const partial = scoreUnitPartial(0, values, labels, opts, createScratch(labels));
      const top = new Set(partial.topProbes.subarray(0, partial.topCount));
      const labelSets = labels.labels.map(() => new Set<number>());
      for (let i = 0; i < probeCount; i++) {
        for (let j = labels.labelOffsets[i]; j < labels.labelOffsets[i + 1]; j++) labelSets[labels.labelIds[j]].add(i);
      }
      const expected = bruteForce(labelSets, top, labelTotal);
      expect(partial.explanation!.iou).toBeCloseTo(expected.iou, 12);
    }
  });

  it('uses beam search when C(h,3) > 5000 and still finds a planted triple', () => {
    const random = seededRandom(8);
    const probeCount = 2000;
    const labels = randomLabels(probeCount, 40, random, 4);
    const planted = new Set([3, 17, 29]);
    const values = new Float32Array(probeCount);
    let inUnion = 0;
    for (let i = 0; i < probeCount; i++) {
      let hit = false;
      for (let j = labels.labelOffsets[i]; j < labels.labelOffsets[i + 1]; j++) if (planted.has(labels.labelIds[j])) hit = true;
      values[i] = hit ? 5 + random() : 0;
      if (hit) inUnion++;
    }
    const opts: ScoreOptions = { ...defaultScoreOptions, minTopCount: inUnion };
    const partial = scoreUnitPartial(0, values, labels, opts);
    let labelsWithHits = 0;
    for (const h of partial.topHits) if (h > 0) labelsWithHits++;
    expect(labelsWithHits).toBe(40); // C(40,3) = 9880 > 5000: the beam branch runs
    expect(partial.explanation).toEqual({ labels: [3, 17, 29], iou: 1 });
  });
});
