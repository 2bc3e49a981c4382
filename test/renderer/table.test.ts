/** The unit table's filter and sort over column arrays (app/renderer/src/lib/table.ts), on hand-made tables. */
import { describe, expect, it } from 'vitest';
import {
  filterRows, sortRows, toggleSort, kindOf, driversOf, countKinds, findRow, splitTerms, allRows, emptyFilter,
  FLAG_DEAD, FLAG_DENSE, type UnitTable,
} from '../../app/renderer/src/lib/table.ts';
import { labelReachCounts } from '../../app/renderer/src/lib/reach.ts';
import { UNIT_KINDS, classifyUnit } from '../../core/score/kind.ts';

/** Six units over two layers; drivers by hand (invented for the test). */
function table(): UnitTable {
  // row: layer, unit, cc, sel, flags, drivers [label, share]
  const rows: [number, number, number | null, number | null, number, [number, number][]][] = [
    [1, 4, 2.6, 0.3, 0, [[0, 0.5], [2, 0.3], [1, 0.2]]], // mixed: red, circle, blue
    [0, 7, 1.9, 0.5, 0, [[1, 0.6], [3, 0.4]]],            // mixed: blue, star
    [0, 2, 1.0, 0.8, 0, [[3, 1]]],                        // single: star
    [1, 0, 1.2, null, 0, [[0, 1]]],                       // single: red, selectivity unknown
    [0, 5, 0, 0.1, 0, []],                                // undriven
    [1, 9, 0, 0, FLAG_DEAD, []],                          // dead
    [1, 3, 0, 0.05, FLAG_DENSE, []],                      // dense
  ];
  const t: UnitTable = {
    layers: [{ name: 'block1.relu', kind: 'conv', units: 8, dims: [8, 4, 4] }, { name: 'head.relu', kind: 'dense', units: 10, dims: [10] }],
    labels: ['red', 'blue', 'circle', 'star'],
    count: rows.length, layer: [], unit: [], rank: [], conceptCount: [], conceptLow: [], conceptHigh: [], selectivity: [], flags: [], kind: [], kinds: [...UNIT_KINDS],
    driverOffsets: [0], driverLabel: [], driverShare: [], driverMore: [],
    thresholds: { maxQ: 0.05, minAuroc: 0.75, topQuantile: 0.005, deadFraction: 0.005, denseFraction: 0.5, polysemanticAt: 1.5 },
  };
  rows.forEach(([l, u, cc, sel, f, ds], i) => {
    t.layer.push(l); t.unit.push(u); t.rank.push(i); t.conceptCount.push(cc); t.selectivity.push(sel); t.flags.push(f);
    // The kind column as core sends it (core/score/kind.ts, tested in test/score/kind.test.ts).
    t.kind.push(UNIT_KINDS.indexOf(classifyUnit({ dead: Boolean(f & FLAG_DEAD), dense: Boolean(f & FLAG_DENSE), conceptCount: cc ?? 0 }, 1.5)));
    t.conceptLow.push(cc === null ? null : cc * 0.8); t.conceptHigh.push(cc === null ? null : cc * 1.1);
    for (const [label, share] of ds) { t.driverLabel.push(label); t.driverShare.push(share); t.driverMore.push([]); }
    t.driverOffsets.push(t.driverLabel.length);
  });
  return t;
}

const units = (t: UnitTable, rows: Int32Array) => Array.from(rows, (i) => `${t.layers[t.layer[i]].name}:${t.unit[i]}`);

describe('kinds and drivers', () => {
  it('shows the kind core sent for each row and counts them', () => {
    const t = table();
    expect(Array.from({ length: t.count }, (_, i) => kindOf(t, i))).toEqual(['mixed', 'mixed', 'single', 'single', 'undriven', 'dead', 'dense']);
    expect(countKinds(t)).toEqual({ mixed: 2, single: 2, undriven: 1, dead: 1, dense: 1 });
  });

  it('reads a row’s drivers from the CSR columns, largest share first', () => {
    expect(driversOf(table(), 0)).toEqual([{ label: 0, name: 'red', share: 0.5 }, { label: 2, name: 'circle', share: 0.3 }, { label: 1, name: 'blue', share: 0.2 }]);
    expect(driversOf(table(), 4)).toEqual([]);
  });

  it('names a compound driver by its labels joined with &, and finds it by any of its labels', () => {
    const t = table();
    t.driverMore[5] = [2]; // row 2's one driver, star, becomes the compound star & circle
    expect(driversOf(t, 2)).toEqual([{ label: 3, name: 'star & circle', share: 1 }]);
    expect(units(t, filterRows(t, { ...emptyFilter(), driver: 2 }))).toEqual(['head.relu:4', 'block1.relu:2']);
    expect(units(t, filterRows(t, { ...emptyFilter(), text: 'circle' }))).toEqual(['head.relu:4', 'block1.relu:2']);
  });

  it('sorts by the concept count interval: its lower end first, largest first', () => {
    const t = table();
    t.conceptLow[1] = 2.5; // row 1 (block1.relu:7) now has the highest lower end
    expect(units(t, sortRows(t, allRows(t), { key: 'interval', dir: -1 })).slice(0, 3)).toEqual(['block1.relu:7', 'head.relu:4', 'head.relu:0']);
  });

  it('counts the units each label drives and of how many it is the only driver', () => {
    const c = labelReachCounts(table());
    expect(Array.from(c.drives)).toEqual([2, 2, 1, 2]);  // red: rows 0,3; blue: 0,1; circle: 0; star: 1,2
    expect(Array.from(c.only)).toEqual([1, 0, 0, 1]);    // red alone on row 3, star alone on row 2
  });
});

describe('filterRows', () => {
  it('keeps everything with the empty filter, in table order', () => {
    const t = table();
    expect(Array.from(filterRows(t, emptyFilter()))).toEqual([0, 1, 2, 3, 4, 5, 6]);
  });

  it('filters by layer, by kind and by driver label ("units driven by X")', () => {
    const t = table();
    expect(units(t, filterRows(t, { ...emptyFilter(), layers: [0] }))).toEqual(['block1.relu:7', 'block1.relu:2', 'block1.relu:5']);
    expect(units(t, filterRows(t, { ...emptyFilter(), kind: 'mixed' }))).toEqual(['head.relu:4', 'block1.relu:7']);
    expect(units(t, filterRows(t, { ...emptyFilter(), driver: 3 }))).toEqual(['block1.relu:7', 'block1.relu:2']);
    expect(units(t, filterRows(t, { ...emptyFilter(), driver: 0, layers: [1], kind: 'single' }))).toEqual(['head.relu:0']);
  });

  it('matches free text on layer names, unit numbers and driver labels; every term must match', () => {
    const t = table();
    expect(units(t, filterRows(t, { ...emptyFilter(), text: 'HEAD' }))).toEqual(['head.relu:4', 'head.relu:0', 'head.relu:9', 'head.relu:3']);
    expect(units(t, filterRows(t, { ...emptyFilter(), text: '#7' }))).toEqual(['block1.relu:7']);
    expect(units(t, filterRows(t, { ...emptyFilter(), text: 'cir' }))).toEqual(['head.relu:4']);
    expect(units(t, filterRows(t, { ...emptyFilter(), text: 'block1 star' }))).toEqual(['block1.relu:7', 'block1.relu:2']);
    // "1" is both a unit number and part of "block1": the unit-number reading does not hide the layer match.
    expect(units(t, filterRows(t, { ...emptyFilter(), text: '1' }))).toEqual(['block1.relu:7', 'block1.relu:2', 'block1.relu:5']);
    expect(filterRows(t, { ...emptyFilter(), text: 'nothing-like-this' })).toHaveLength(0);
    expect(splitTerms('  a   b ')).toEqual(['a', 'b']);
  });

  it('keeps the order it is given (filtering a sorted order)', () => {
    const t = table();
    const byUnit = sortRows(t, allRows(t), { key: 'unit', dir: 1 });
    expect(units(t, filterRows(t, { ...emptyFilter(), layers: [1] }, byUnit))).toEqual(['head.relu:0', 'head.relu:3', 'head.relu:4', 'head.relu:9']);
  });
});

describe('sortRows', () => {
  const t = table();
  const all = allRows(t);

  it('sorts by concept count, largest first, ties in rank order', () => {
    expect(Array.from(sortRows(t, all, { key: 'concepts', dir: -1 }))).toEqual([0, 1, 3, 2, 4, 5, 6]);
    expect(Array.from(sortRows(t, all, { key: 'concepts', dir: 1 }))).toEqual([4, 5, 6, 2, 3, 1, 0]);
  });

  it('puts missing values last in both directions', () => {
    expect(sortRows(t, all, { key: 'selectivity', dir: -1 })[6]).toBe(3);
    expect(sortRows(t, all, { key: 'selectivity', dir: 1 })[6]).toBe(3);
    expect(Array.from(sortRows(t, all, { key: 'selectivity', dir: -1 })).slice(0, 3)).toEqual([2, 1, 0]);
  });

  it('sorts layers in graph order then by unit, and drivers by the top driver’s name', () => {
    expect(units(t, sortRows(t, all, { key: 'layer', dir: 1 }))).toEqual(['block1.relu:2', 'block1.relu:5', 'block1.relu:7', 'head.relu:0', 'head.relu:3', 'head.relu:4', 'head.relu:9']);
    // Top drivers: blue (row 1), red (rows 0 and 3: larger share first, 1.0 before 0.5), star (row 2); none last.
    expect(Array.from(sortRows(t, all, { key: 'drivers', dir: 1 }))).toEqual([1, 3, 0, 2, 4, 5, 6]);
    expect(Array.from(sortRows(t, all, { key: 'flags', dir: -1 })).slice(0, 2)).toEqual([6, 5]);
  });

  it('leaves rank order for the review column until review data exists, and does not touch its input', () => {
    const rows = Int32Array.from([3, 1, 2]);
    expect(Array.from(sortRows(t, rows, { key: 'review', dir: -1 }))).toEqual([1, 2, 3]);
    expect(Array.from(rows)).toEqual([3, 1, 2]);
  });

  it('sorts 10^5 rows by every column into a permutation (no row lost or repeated)', () => {
    const n = 100_000;
    const big = table();
    big.count = n;
    big.layer = []; big.unit = []; big.rank = []; big.conceptCount = []; big.selectivity = []; big.flags = []; big.kind = [];
    big.driverOffsets = [0]; big.driverLabel = []; big.driverShare = [];
    for (let i = 0; i < n; i++) {
      big.layer.push(i % 2); big.unit.push(i >> 1); big.rank.push(i); big.conceptCount.push((i * 7919) % 300 / 100);
      big.selectivity.push(i % 11 === 0 ? null : ((i * 31) % 100) / 100); big.flags.push(i % 97 === 0 ? FLAG_DEAD : 0);
      big.kind.push(UNIT_KINDS.indexOf(classifyUnit({ dead: i % 97 === 0, dense: false, conceptCount: big.conceptCount[i]! }, 1.5)));
      if (i % 3) { big.driverLabel.push(i % 4); big.driverShare.push(1); }
      big.driverOffsets.push(big.driverLabel.length);
    }
    for (const key of ['rank', 'layer', 'unit', 'concepts', 'drivers', 'selectivity', 'flags', 'review'] as const) {
      const sorted = sortRows(big, allRows(big), { key, dir: -1 });
      const seen = new Uint8Array(n);
      for (const i of sorted) seen[i]++;
      expect(seen.every((c) => c === 1)).toBe(true);
    }
  });

  it('toggles direction on the same column and starts scores largest-first', () => {
    expect(toggleSort({ key: 'rank', dir: 1 }, 'concepts')).toEqual({ key: 'concepts', dir: -1 });
    expect(toggleSort({ key: 'concepts', dir: -1 }, 'concepts')).toEqual({ key: 'concepts', dir: 1 });
    expect(toggleSort({ key: 'concepts', dir: 1 }, 'layer')).toEqual({ key: 'layer', dir: 1 });
  });

  it('finds a unit’s row', () => {
    expect(findRow(t, 'head.relu', 9)).toBe(5);
    expect(findRow(t, 'head.relu', 99)).toBe(-1);
    expect(findRow(t, 'nope', 0)).toBe(-1);
  });
});
