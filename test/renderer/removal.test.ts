/** The removal-cost panel's and the roster's plain logic (app/renderer/src/lib/removal.ts, table.ts). */
import { describe, expect, it } from 'vitest';
import { chartLabels, costHeadline, costTraces } from '../../app/renderer/src/lib/removal.ts';
import { hurtColumn, sortRows, allRows, type UnitTable } from '../../app/renderer/src/lib/table.ts';
import type { UnitCost, LabelCost } from '../../core/api/contract.ts';

const label = (name: string, mean: number, hurt: boolean, interval: [number, number] | null = null): LabelCost =>
  ({ label: name, n: 10, mean, meanOthers: 0, interval, p: hurt ? 0.001 : 0.5, q: hurt ? 0.002 : 0.6, hurt, accuracyBase: null, accuracyAblated: null });
const cost = (labels: LabelCost[], conceptsHurt: number, costly = false): UnitCost => ({
  metric: 'target-drop', floor: 0.01, probes: 100, labels, hurt: labels.filter((l) => l.hurt).map((l) => l.label),
  largest: null, conceptsHurt, overall: { mean: 0, p: 1, costly }, reps: 2000,
});

describe('removal-cost panel logic', () => {
  it('charts every hurt label first, then the largest others, up to the limit', () => {
    const c = cost([label('a', 0.1, false), label('b', 0.05, true), label('c', 0.3, false), label('d', 0.01, true)], 2);
    expect(chartLabels(c, 3).map((l) => l.label)).toEqual(['b', 'd', 'c']);
    const [trace] = costTraces(c, () => 'red', 'grey', 3) as { y: string[]; marker: { color: string[] } }[];
    expect(trace.y).toEqual(['c', 'd', 'b']); // reversed: plotly draws the first bar at the bottom
    expect(trace.marker.color).toEqual(['grey', 'red', 'red']);
  });

  it('says how many labels and concepts are hurt, or that none is', () => {
    expect(costHeadline(cost([label('a', 0.2, true), label('b', 0.2, true)], 2))).toBe('Hurts 2 labels — 2.0 unrelated concepts.');
    expect(costHeadline(cost([label('a', 0.2, true)], 1))).toBe('Hurts 1 label — one concept.');
    expect(costHeadline(cost([label('a', 0, false)], 0))).toBe('No label is hurt measurably.');
    expect(costHeadline(cost([label('a', 0.1, false)], 0, true))).toMatch(/every probe pays alike/);
  });
});

describe('roster sort by concepts hurt', () => {
  it('puts measured units first, most concepts hurt first, unmeasured ones after in rank order', () => {
    const t = { count: 4, rank: Int32Array.from([0, 1, 2, 3]), layer: Int32Array.from([0, 0, 1, 1]), unit: Int32Array.from([0, 1, 0, 1]),
      layers: [{ name: 'a' }, { name: 'b' }] } as unknown as UnitTable;
    const hurt = hurtColumn(t, [{ layer: 'b', units: [0, 1], conceptsHurt: [1.2, 2.5] }]);
    expect([...hurt].map((v) => (Number.isNaN(v) ? null : v))).toEqual([null, null, 1.2, 2.5]);
    expect([...sortRows(t, allRows(t), { key: 'hurt', dir: -1 }, hurt)]).toEqual([3, 2, 0, 1]);
  });
});
