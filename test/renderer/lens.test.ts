/** The Lens view's plain logic: its route, the segments of the direction picture, the heatmap and the curves (common practice, no source). */
import { describe, expect, it } from 'vitest';
import { parseRoute, routeHash } from '../../app/renderer/src/lib/route.ts';
import { cosineTrace, curveTraces, directionTraces, squareRange } from '../../app/renderer/src/lib/lens.ts';
import type { LensResult } from '../../core/api/contract.ts';

const concept = (name: string, carried: boolean, auroc: number) => ({
  name, kind: 'label' as const, positives: 10, norm: 1, auroc, carried, decodable: auroc >= 0.9, dimensionality: 0.5, interference: 1,
  curve: carried ? [{ k: 1, auroc: 0.7 }, { k: 2, auroc }] : [], k95: carried ? 2 : null, locality: carried ? 'few' as const : 'not carried' as const, topUnits: [],
});
const lens = {
  concepts: [concept('a', true, 0.95), concept('b', false, 0.6), concept('c', true, 0.99)],
  carriedOrder: [2, 0], cosine: [[1, -0.5], [-0.5, 1]],
  projection: { x: [3, -1], y: [0, 2], kept: 1, method: 'm' },
} as unknown as LensResult;

describe('lens view logic', () => {
  it('routes to a layer and back', () => {
    expect(parseRoute(routeHash({ screen: 'lens', study: '/s.study', layer: 'relu_narrow' }))).toEqual({ screen: 'lens', study: '/s.study', layer: 'relu_narrow' });
    expect(parseRoute('#/lens?study=%2Fs.study')).toEqual({ screen: 'lens', study: '/s.study' });
    expect(parseRoute('#/lens')).toEqual({ screen: 'desk' });
  });
  it('draws one segment from the origin per carried concept, in clustered order, and none for the rest', () => {
    const t = directionTraces(lens, () => '#000', 'c');
    expect(t.map((x) => x.name)).toEqual(['c', 'a']);
    expect(t[0].x).toEqual([0, 3]);
    expect(t[1].y).toEqual([0, 2]);
    expect(t[1].opacity).toBeLessThan(1); // not the picked one
    expect(squareRange(lens)).toBeCloseTo(3.75, 12);
  });
  it('labels the heatmap by the clustered order and bounds it to [−1, 1]', () => {
    const h = cosineTrace(lens, 'lo', 'mid', 'hi');
    expect(h.x).toEqual(['c', 'a']);
    expect([h.zmin, h.zmax]).toEqual([-1, 1]);
  });
  it('draws a localisation curve for carried concepts only', () => {
    expect(curveTraces(lens, () => '#000', null).map((x) => x.name)).toEqual(['a', 'c']);
  });
});
