/** The renderer's plain logic: formatting, routes, cursor and row-window maths, recents, colours, the API client's token. */
import { describe, expect, it } from 'vitest';
import { Virtualizer } from '@tanstack/virtual-core';
import { count, fixed, pValue, percent, eta, shape, baseName, dirName, unitName } from '../../app/renderer/src/lib/format.ts';
import { parseRoute, routeHash, routeStudy, type Route } from '../../app/renderer/src/lib/route.ts';
import { moveCursor, pageRows, offsetToReveal, ROW_HEIGHT, OVERSCAN } from '../../app/renderer/src/lib/cursor.ts';
import { rowWindowOptions } from '../../app/renderer/src/lib/rows.ts';
import { addRecent, forgetRecent, readRecents, MAX_RECENTS, type Recent } from '../../app/renderer/src/lib/recents.ts';
import { fnv1a, labelColor } from '../../app/renderer/src/lib/colors.ts';
import { spatialBox, binCentres, shares, histogramTraces } from '../../app/renderer/src/lib/profile.ts';
import { kindShares } from '../../app/renderer/src/lib/strata.ts';
import { launchToken, asErrorInfo, ApiError } from '../../app/renderer/src/lib/api.ts';
import { initialTheme } from '../../app/renderer/src/lib/theme.ts';

function memoryStorage(init: Record<string, string> = {}) {
  const m = new Map(Object.entries(init));
  return { getItem: (k: string) => m.get(k) ?? null, setItem: (k: string, v: string) => { m.set(k, v); }, m };
}

describe('format', () => {
  it('formats numbers the same on every machine', () => {
    expect(count(1234567)).toBe('1,234,567');
    expect(fixed(1.005, 2)).toBe('1.00'); // IEEE-754: 1.005 is stored as 1.00499999999999989… (common practice, no source)
    expect(fixed(null)).toBe('—');
    expect(fixed(NaN)).toBe('—');
    expect(percent(0.4231)).toBe('42%');
    expect(percent(0.4231, 1)).toBe('42.3%');
  });

  it('writes q-values plainly down to 0.001, then in short scientific form', () => {
    expect(pValue(0.05)).toBe('0.050');
    expect(pValue(0.001)).toBe('0.001');
    expect(pValue(0.000032)).toBe('3.2e-5');
    expect(pValue(2.5e-11)).toBe('2.5e-11');
    expect(pValue(0)).toBe('< 1e-300');
    expect(pValue(undefined)).toBe('—');
  });

  it('says time left as a person would', () => {
    expect(eta(null)).toBe('estimating…');
    expect(eta(12.4)).toBe('12 s');
    expect(eta(185)).toBe('3 min 05 s');
    expect(eta(3720)).toBe('1 h 02 min');
  });

  it('names shapes, paths and units', () => {
    expect(shape(['batch', 8, null])).toBe('batch × 8 × ?');
    expect(shape([])).toBe('scalar');
    expect(shape(null)).toBe('unknown');
    expect(baseName('/a/b/demo.study')).toBe('demo.study');
    expect(baseName('C:\\x\\m.onnx')).toBe('m.onnx');
    expect(dirName('/a/b/m.onnx')).toBe('/a/b');
    expect(dirName('/m.onnx')).toBe('/');
    expect(unitName('relu_wide', 3)).toBe('relu_wide · 3');
  });
});

describe('routes', () => {
  const routes: Route[] = [
    { screen: 'desk' },
    { screen: 'capture', study: '/d/x y.study', model: '/m/a&b.onnx', probes: '/p/', job: 'j-1' },
    { screen: 'roster', study: '/d/s.study' },
    { screen: 'profile', study: '/d/s.study', layer: 'block/1:relu', unit: 0 },
    { screen: 'reach', study: '/d/s.study', label: 'red & blue' },
    { screen: 'reach', study: '/d/s.study' },
    { screen: 'strata', study: '/d/s.study' },
  ];
  it('round-trips every screen through the hash, special characters included', () => {
    for (const r of routes) expect(parseRoute(routeHash(r))).toEqual(r);
  });
  it('falls back to the desk for anything incomplete or unknown', () => {
    expect(parseRoute('')).toEqual({ screen: 'desk' });
    expect(parseRoute('#/roster')).toEqual({ screen: 'desk' });
    expect(parseRoute('#/profile?study=s&layer=l&unit=-1')).toEqual({ screen: 'desk' });
    expect(parseRoute('#/profile?study=s&layer=l&unit=')).toEqual({ screen: 'desk' });
    expect(parseRoute('#/elsewhere?study=s')).toEqual({ screen: 'desk' });
  });
  it('names the study of a route', () => {
    expect(routeStudy({ screen: 'desk' })).toBeNull();
    expect(routeStudy({ screen: 'strata', study: '/s' })).toBe('/s');
  });
});

describe('cursor and row window', () => {
  it('moves the cursor inside the list', () => {
    expect(moveCursor(0, 1, 10)).toBe(1);
    expect(moveCursor(9, 1, 10)).toBe(9);
    expect(moveCursor(0, -1, 10)).toBe(0);
    expect(moveCursor(3, 100, 10)).toBe(9);
    expect(moveCursor(-1, 1, 10)).toBe(0);
    expect(moveCursor(-1, -1, 10)).toBe(9);
    expect(moveCursor(5, 1, 0)).toBe(-1);
    expect(pageRows(260)).toBe(10);
    expect(pageRows(10)).toBe(1);
  });

  it('scrolls as little as possible to reveal the cursor row', () => {
    // Viewport 260 px = rows 10..19 when scrolled to 260.
    expect(offsetToReveal(12, 260, 260)).toBe(260);        // visible: no move
    expect(offsetToReveal(5, 260, 260)).toBe(5 * ROW_HEIGHT); // above: align top
    expect(offsetToReveal(20, 260, 260)).toBe(21 * ROW_HEIGHT - 260); // below: align bottom
    expect(offsetToReveal(0, 0, 10)).toBe(0);
  });

  it('renders only the rows in view plus the overscan, at 10^5 rows, wherever it is scrolled', () => {
    const count = 100_000;
    const viewport = 520; // 20 rows
    let offset = 0;
    let notifyOffset: (o: number, scrolling: boolean) => void = () => {};
    const fakeElement = {} as HTMLElement;
    const w = new Virtualizer(rowWindowOptions(count, () => fakeElement, () => {}, {
      observeElementRect: (_i, cb) => { cb({ width: 800, height: viewport }); return () => {}; },
      observeElementOffset: (_i, cb) => { notifyOffset = cb; cb(offset, false); return () => {}; },
      scrollToFn: (o) => { offset = o; notifyOffset(o, false); },
    }));
    const unmount = w._didMount();
    w._willUpdate();
    expect(w.getTotalSize()).toBe(count * ROW_HEIGHT);
    let items = w.getVirtualItems();
    expect(items[0].index).toBe(0);
    expect(items.length).toBe(viewport / ROW_HEIGHT + OVERSCAN);
    // Scroll to row 50,000: rows 50,000 − overscan … 50,019 + overscan, each at index × row height.
    notifyOffset(50_000 * ROW_HEIGHT, false);
    items = w.getVirtualItems();
    expect(items[0].index).toBe(50_000 - OVERSCAN);
    expect(items[items.length - 1].index).toBe(50_000 + viewport / ROW_HEIGHT - 1 + OVERSCAN);
    for (const it of items) expect(it.start).toBe(it.index * ROW_HEIGHT);
    // At the very end the window stops at the last row.
    notifyOffset(count * ROW_HEIGHT - viewport, false);
    items = w.getVirtualItems();
    expect(items[items.length - 1].index).toBe(count - 1);
    unmount();
  });
});

describe('recents', () => {
  const r = (study: string): Recent => ({ study, model: 'm', probes: 'p', openedAt: '2026-01-01T00:00:00Z' });
  it('keeps the newest first, once each, at most MAX_RECENTS', () => {
    let list: Recent[] = [];
    for (let i = 0; i < MAX_RECENTS + 3; i++) list = addRecent(list, r(`s${i}`));
    expect(list).toHaveLength(MAX_RECENTS);
    expect(list[0].study).toBe(`s${MAX_RECENTS + 2}`);
    list = addRecent(list, r('s5'));
    expect(list[0].study).toBe('s5');
    expect(list.filter((x) => x.study === 's5')).toHaveLength(1);
    expect(forgetRecent(list, 's5').some((x) => x.study === 's5')).toBe(false);
  });
  it('reads nothing from damaged storage rather than failing', () => {
    expect(readRecents(memoryStorage({ 'skein.recents': '{not json' }))).toEqual([]);
    expect(readRecents(memoryStorage({ 'skein.recents': '{"a":1}' }))).toEqual([]);
    expect(readRecents(memoryStorage())).toEqual([]);
  });
});

describe('colours and theme', () => {
  it('hashes with FNV-1a 32-bit', () => {
    // Reference values of the FNV-1a 32-bit hash: "" → 0x811c9dc5, "a" → 0xe40c292c (Fowler–Noll–Vo reference test vectors, from memory).
    expect(fnv1a('')).toBe(0x811c9dc5);
    expect(fnv1a('a')).toBe(0xe40c292c);
  });
  it('gives the labels of one study distinct colours, in both themes', () => {
    const labels = Array.from({ length: 12 }, (_, i) => `label${i}`);
    for (const theme of ['light', 'dark'] as const) expect(new Set(labels.map((l) => labelColor(l, theme, labels))).size).toBe(12);
    // A label outside the list is coloured by its hash: FNV-1a 32 of "foobar" is 0xbf9cf968 (FNV reference test
    // vectors, from memory; checked with an independent Python implementation), 0xbf9cf968 mod 16 = 8 → the ninth
    // palette entry of each theme (app/renderer/src/lib/colors.ts PALETTE).
    expect(fnv1a('foobar')).toBe(0xbf9cf968);
    expect(labelColor('foobar', 'light')).toBe('#7f8a2a');
    expect(labelColor('foobar', 'dark')).toBe('#bcc46a');
  });
  it('follows the system until the user chooses', () => {
    expect(initialTheme(memoryStorage(), true)).toBe('dark');
    expect(initialTheme(memoryStorage({ 'skein.theme': 'light' }), true)).toBe('light');
    expect(initialTheme(memoryStorage({ 'skein.theme': 'purple' }), false)).toBe('light');
  });
});

describe('unit profile helpers', () => {
  it('maps a conv location h·W + w onto the image grid', () => {
    // dims [C, H, W] = [8, 4, 6]; location 15 = row 2, column 3.
    expect(spatialBox('conv', [8, 4, 6], 15)).toEqual({ left: 50, top: 50, width: 100 / 6, height: 25, row: 2, col: 3, rows: 4, cols: 6 });
    expect(spatialBox('conv', [8, 4, 6], 0)).toMatchObject({ left: 0, top: 0 });
    expect(spatialBox('conv', [8, 4, 6], 23)).toMatchObject({ row: 3, col: 5 });
    expect(spatialBox('conv', [8, 4, 6], 24)).toBeNull();
    expect(spatialBox('dense', [8], 3)).toBeNull();
    expect(spatialBox('conv', [8, 4, 6], null)).toBeNull();
  });
  it('builds histogram traces as shares of each whole group, floor included', () => {
    expect(binCentres([0, 1, 3])).toEqual([0.5, 2]);
    expect(shares([1, 3], 8)).toEqual([0.125, 0.375]);
    expect(shares([1], 0)).toEqual([0]);
    const traces = histogramTraces({
      layer: 'l', unit: 0, probes: 10, floor: 0, edges: [0, 1, 2], all: [4, 2], allAtFloor: 4,
      labels: [{ label: 'red', n: 5, counts: [1, 2], atFloor: 2, auroc: 0.8, isDriver: true }],
    }, () => '#000', '#999');
    expect(traces).toHaveLength(2);
    expect(traces[0].y).toEqual([0.4, 0.2]);
    expect(traces[1].y).toEqual([0.2, 0.4]);
    expect(String(traces[1].name)).toContain('red');
  });
  it('splits a layer into kind shares summing to one', () => {
    const s = kindShares({ name: 'l', op: 'Relu', kind: 'dense', units: 8, dead: 1, dense: 1, undriven: 2, single: 3, mixed: 1, meanConceptCount: 1.2, maxConceptCount: 2, histogram: [], baseline: null });
    expect(s.mixed + s.single + s.undriven + s.dead + s.dense).toBeCloseTo(1, 12);
    expect(s.single).toBe(3 / 8);
  });
});

describe('API client', () => {
  it('takes the launch token from the URL once, then from the tab’s storage', () => {
    const store = memoryStorage();
    expect(launchToken('?token=abc', store)).toBe('abc');
    expect(launchToken('', store)).toBe('abc');
    expect(launchToken('?other=1', memoryStorage())).toBeNull();
  });
  it('turns anything thrown into an error a screen can show', () => {
    expect(asErrorInfo(new ApiError({ code: 'study', message: 'm', file: 'f', where: 'w' }))).toEqual({ code: 'study', message: 'm', file: 'f', where: 'w' });
    expect(asErrorInfo(new TypeError('Failed to fetch'))).toMatchObject({ code: 'io', message: expect.stringContaining('Failed to fetch') });
  });
});
