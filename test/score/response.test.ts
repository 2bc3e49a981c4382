/**
 * The response table of the unit page (core/score/response.ts): a hand-worked example, the limiting values of the
 * "above none" figure, and its agreement with scipy.stats.mannwhitneyu (Debian's python3-scipy) when installed.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import { describe, expect, it } from 'vitest';
import { driverPresence, responseTable } from '../../core/score/response.ts';
import { rng } from '../support/fixtures.ts';

const SYSTEM_PYTHON = '/usr/bin/python3';
const hasScipy = fs.existsSync(SYSTEM_PYTHON) && spawnSync(SYSTEM_PYTHON, ['-c', 'import scipy.stats'], { encoding: 'utf8' }).status === 0;

describe('response table', () => {
  it('sorts probes into alone / with others / none and gives the hand-computed counts, means and effects', () => {
    // probe:        0  1  2  3  4  5  6  7
    // A:            .  .  x  x  .  x  .  x
    // B:            .  .  .  x  x  .  .  x
    const values = new Float32Array([0, 1, 2, 6, 3, 4, 0.5, 8]);
    const a = driverPresence(8, [[2, 3, 5, 7]]);
    const b = driverPresence(8, [[3, 4, 7]]);
    const t = responseTable(values, [a, b], { examples: 2 });
    // none = {0, 1, 6}: mean (0 + 1 + 0.5) / 3 = 0.5
    expect(t.none).toEqual({ n: 3, mean: 0.5 });
    expect(t.all.n).toBe(8);
    expect(t.all.mean).toBeCloseTo(24.5 / 8, 12);
    // A alone = {2, 5}: mean 3, effect 2.5; A with B = {3, 7}: mean 7, effect 6.5
    expect(t.drivers[0].alone).toEqual({ n: 2, mean: 3 });
    expect(t.drivers[0].withOthers).toEqual({ n: 2, mean: 7 });
    expect(t.drivers[0].effectAlone).toBeCloseTo(2.5, 12);
    expect(t.drivers[0].effectWithOthers).toBeCloseTo(6.5, 12);
    // B alone = {4}: mean 3
    expect(t.drivers[1].alone).toEqual({ n: 1, mean: 3 });
    expect(t.drivers[1].withOthers).toEqual({ n: 2, mean: 7 });
    // Every probe of A alone is above every probe of none: the limiting value 1.
    expect(t.drivers[0].aboveNoneAlone).toBe(1);
    // Examples: the highest of each group first, at most 2.
    expect(t.drivers[0].examples).toEqual([5, 2]);
    expect(t.drivers[1].examples).toEqual([4]);
    expect(t.noneExamples).toEqual([1, 6]);
  });

  it('takes a compound driver as present only where all its parts are', () => {
    expect(Array.from(driverPresence(6, [[0, 1, 2, 5], [1, 2, 3]]))).toEqual([0, 1, 1, 0, 0, 0]);
    expect(Array.from(driverPresence(3, []))).toEqual([0, 0, 0]);
  });

  it('gives "above none" its limiting values: 0.5 when the group is indistinguishable, null when a group is empty', () => {
    // Identical values everywhere: every pair is a tie, counted half (Mann & Whitney 1947) → 0.5.
    const flat = responseTable(new Float32Array(6).fill(2), [driverPresence(6, [[0, 1, 2]])]);
    expect(flat.drivers[0].aboveNoneAlone).toBe(0.5);
    expect(flat.drivers[0].effectAlone).toBe(0);
    // A driver on every probe leaves "none" empty: no effect is defined.
    const everywhere = responseTable(new Float32Array([1, 2, 3]), [driverPresence(3, [[0, 1, 2]])]);
    expect(everywhere.none).toEqual({ n: 0, mean: null });
    expect(everywhere.drivers[0].effectAlone).toBeNull();
    expect(everywhere.drivers[0].aboveNoneAlone).toBeNull();
    expect(everywhere.drivers[0].withOthers).toEqual({ n: 0, mean: null });
  });

  it.skipIf(!hasScipy)('agrees with scipy.stats.mannwhitneyu on tied random data', () => {
    const r = rng(21);
    const n = 600;
    // Values rounded to one decimal so ties are common.
    const values = new Float32Array(n).map(() => Math.round(r() * 30) / 10);
    const la: number[] = [], lb: number[] = [];
    for (let p = 0; p < n; p++) { if (r() < 0.3) la.push(p); if (r() < 0.25) lb.push(p); }
    const t = responseTable(values, [driverPresence(n, [la]), driverPresence(n, [lb])]);
    const script = `
import json, sys
import numpy as np
from scipy.stats import mannwhitneyu
d = json.load(sys.stdin)
v = np.array(d['v'], dtype=np.float32).astype(np.float64)
a = np.zeros(len(v), bool); a[d['a']] = True
b = np.zeros(len(v), bool); b[d['b']] = True
none = ~a & ~b
out = {}
for name, g in [('aloneA', a & ~b), ('aloneB', b & ~a), ('both', a & b)]:
    u = mannwhitneyu(v[g], v[none], alternative='two-sided').statistic
    out[name] = [float(u / (g.sum() * none.sum())), int(g.sum()), float(v[g].mean() - v[none].mean())]
print(json.dumps(out))`;
    const py = spawnSync(SYSTEM_PYTHON, ['-c', script], { input: JSON.stringify({ v: Array.from(values), a: la, b: lb }), encoding: 'utf8' });
    expect(py.stderr).toBe('');
    const ref = JSON.parse(py.stdout) as Record<string, [number, number, number]>;
    expect(t.drivers[0].alone.n).toBe(ref.aloneA[1]);
    expect(t.drivers[0].aboveNoneAlone).toBeCloseTo(ref.aloneA[0], 12);
    expect(t.drivers[0].effectAlone).toBeCloseTo(ref.aloneA[2], 6);
    expect(t.drivers[1].aboveNoneAlone).toBeCloseTo(ref.aloneB[0], 12);
    expect(t.drivers[0].withOthers.n).toBe(ref.both[1]);
    expect(t.drivers[0].aboveNoneWithOthers).toBeCloseTo(ref.both[0], 12);
    expect(t.drivers[1].aboveNoneWithOthers).toBeCloseTo(ref.both[0], 12);
  });
  if (!hasScipy) console.warn('SKIPPED: scipy cross-check (install python3-scipy to run it)');
});
