/**
 * The joint model's statistics against reference libraries (Debian's python3-scipy): the one-sided Mann–Whitney
 * p-value (scipy.stats.mannwhitneyu, method='asymptotic', alternative='greater', continuity correction, tie
 * correction), erfc (scipy.special.erfc), and the conditional test computed in one sweep over the unit's sort
 * against scipy run on the explicit "alone" and "none" groups. The limiting values are checked without scipy.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import { describe, expect, it } from 'vitest';
import { createScratch, defaultScoreOptions, scoreUnitPartial } from '../../core/score/index.ts';
import { erfc, mannWhitneyGreaterP, normalUpperTail } from '../../core/score/stats.ts';
import { JOINT_LABELS, jointActivations, jointProbes } from '../support/joint-fixtures.ts';
import { labelMatrixOf, seededRandom } from './helpers.ts';

const SYSTEM_PYTHON = '/usr/bin/python3';
const hasScipy = fs.existsSync(SYSTEM_PYTHON) && spawnSync(SYSTEM_PYTHON, ['-c', 'import scipy.stats'], { encoding: 'utf8' }).status === 0;
const withScipy = hasScipy ? it : it.skip;

function python(script: string, input: unknown): unknown {
  const r = spawnSync(SYSTEM_PYTHON, ['-c', script], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 64 << 20 });
  if (r.status !== 0) throw new Error(r.stderr);
  return JSON.parse(r.stdout);
}

/** U (pairs x wins, ties half) and Σ(t³ − t) over the pooled sample, straight from the definitions in O(n²). */
function uAndTies(x: number[], y: number[]): { u: number; ties: number } {
  let u = 0;
  for (const a of x) for (const b of y) u += a > b ? 1 : a === b ? 0.5 : 0;
  const counts = new Map<number, number>();
  for (const v of [...x, ...y]) counts.set(v, (counts.get(v) ?? 0) + 1);
  let ties = 0;
  for (const t of counts.values()) ties += t ** 3 - t;
  return { u, ties };
}

describe('joint model statistics', () => {
  it('has the normal tail\'s known values (P(Z ≥ 0) = ½, P(Z ≥ 1.959964) ≈ 0.025) and erfc(0) = 1, erfc(∞) = 0', () => {
    expect(normalUpperTail(0)).toBeCloseTo(0.5, 7);
    expect(normalUpperTail(1.959963985)).toBeCloseTo(0.025, 7); // standard normal table, common practice
    expect(erfc(0)).toBeCloseTo(1, 7);
    expect(erfc(40)).toBe(0);
    expect(erfc(-40)).toBe(2);
  });

  withScipy('matches scipy.stats.mannwhitneyu (asymptotic, greater) on samples with ties, and scipy.special.erfc', () => {
    const random = seededRandom(5);
    const cases = Array.from({ length: 12 }, (_, k) => {
      const n1 = 5 + Math.floor(random() * 60);
      const n0 = 5 + Math.floor(random() * 80);
      const shift = (k % 4) * 0.4;
      const x = Array.from({ length: n1 }, () => Math.max(0, Math.round((random() + shift - 0.3) * 8) / 8));
      const y = Array.from({ length: n0 }, () => Math.max(0, Math.round((random() - 0.3) * 8) / 8));
      return { x, y };
    });
    const grid = Array.from({ length: 41 }, (_, i) => -4 + i * 0.25);
    const ref = python(`
import json, sys
from scipy.stats import mannwhitneyu
from scipy.special import erfc
d = json.load(sys.stdin)
print(json.dumps({"p": [mannwhitneyu(c["x"], c["y"], alternative="greater", method="asymptotic", use_continuity=True).pvalue for c in d["cases"]],
                  "erfc": [float(erfc(v)) for v in d["grid"]]}))`, { cases, grid }) as { p: number[]; erfc: number[] };
    cases.forEach(({ x, y }, i) => {
      const { u, ties } = uAndTies(x, y);
      const p = mannWhitneyGreaterP(u, x.length, y.length, ties);
      expect(Math.abs(p - ref.p[i]) / Math.max(ref.p[i], 1e-12)).toBeLessThan(1e-5); // erfc fit: relative error < 1.2e-7
    });
    grid.forEach((v, i) => expect(Math.abs(erfc(v) - ref.erfc[i]) / ref.erfc[i]).toBeLessThan(2e-7));
  });

  withScipy('computes each driver\'s alone-vs-none test in one sweep as scipy does on the explicit groups', () => {
    const { rows, labels, width } = jointProbes(3000, 3);
    const matrix = labelMatrixOf(JOINT_LABELS, labels);
    const acts = jointActivations(rows, width);
    const scratch = createScratch(matrix);
    const checked: { x: number[]; y: number[]; auroc: number; p: number }[] = [];
    for (const u of [1, 3, 4, 6]) { // either common, common and rare, graded shift (ties at 0 and none), nested
      const partial = scoreUnitPartial(u, acts[u], matrix, defaultScoreOptions, scratch);
      const drivers = partial.joint.terms.filter((t) => t.kind === 'driver');
      expect(drivers.length).toBeGreaterThan(0);
      const has = (i: number, ls: number[]) => ls.every((l) => labels[i].includes(JOINT_LABELS[l]));
      for (const d of drivers) {
        const others = drivers.filter((o) => o !== d);
        const x: number[] = [];
        const y: number[] = [];
        for (let i = 0; i < labels.length; i++) {
          const inOthers = others.some((o) => has(i, o.labels));
          if (has(i, d.labels) && !inOthers) x.push(acts[u][i]);
          else if (!has(i, d.labels) && !inOthers) y.push(acts[u][i]);
        }
        expect(x.length).toBe(d.alone.n);
        expect(y.length).toBe(d.none.n);
        checked.push({ x, y, auroc: d.auroc, p: d.p });
      }
    }
    const ref = python(`
import json, sys
from scipy.stats import mannwhitneyu
d = json.load(sys.stdin)
out = []
for c in d:
    r = mannwhitneyu(c["x"], c["y"], alternative="greater", method="asymptotic", use_continuity=True)
    out.append([r.statistic / (len(c["x"]) * len(c["y"])), r.pvalue])
print(json.dumps(out))`, checked) as [number, number][];
    checked.forEach((c, i) => {
      expect(c.auroc).toBeCloseTo(ref[i][0], 12);
      if (ref[i][1] > 1e-250) expect(Math.abs(c.p - ref[i][1]) / ref[i][1]).toBeLessThan(1e-4);
    });
  });
  if (!hasScipy) console.warn('SKIPPED: scipy cross-checks of the joint model (install python3-scipy to run them)');
});
