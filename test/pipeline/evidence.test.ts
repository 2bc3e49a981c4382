/**
 * `unit.evidence` on the planted study (test/support/fixtures.ts): the unit built as ReLU(blue + square + tiny noise)
 * must show, by construction, ≈1 more activation with blue alone or square alone than with neither, and ≈2 with both.
 * Counts and means are checked against an independent computation: numpy over the exported activations (.npy) and the
 * probe set's own labels.csv, not over anything Skein computed for the page.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, runScan } from '../../core/api/index.ts';
import { PLANTED_UNITS, tempDir, writePlanted } from '../support/fixtures.ts';

const SYSTEM_PYTHON = '/usr/bin/python3';
const hasNumpy = fs.existsSync(SYSTEM_PYTHON) && spawnSync(SYSTEM_PYTHON, ['-c', 'import numpy'], { encoding: 'utf8' }).status === 0;
const unitOf = (name: string) => PLANTED_UNITS.findIndex((u) => u.name === name);

describe('unit.evidence on the planted study', () => {
  let dir: string;
  let probes: string;
  let study: string;
  const api = createApi({});

  beforeAll(async () => {
    dir = tempDir();
    const w = writePlanted(dir, 3000, 9);
    probes = w.probes;
    study = path.join(dir, 'evidence.study');
    await runScan({ model: w.model, probes, study, batch: 300, layers: ['planted'], chunkSize: 700 });
  });

  it('gives the conjunction-free two-label unit its planted effects (≈1 alone, ≈2 together)', async () => {
    const e = await api['unit.evidence']({ study, layer: 'planted', unit: unitOf('blue+square') });
    expect(e.driverSource).toBe('scores');
    expect(e.drivers.map((d) => d.name).sort()).toEqual(['blue', 'square']);
    for (const d of e.drivers) {
      // weights 1, noise weight 0.001 on inputs in [0, 1): the group means are 1 (alone), 2 (both), 0 (none), each + < 0.0015.
      expect(d.effectAlone!).toBeGreaterThan(0.998);
      expect(d.effectAlone!).toBeLessThan(1.002);
      expect(d.effectWithOthers!).toBeGreaterThan(1.998);
      expect(d.effectWithOthers!).toBeLessThan(2.002);
      expect(d.aboveNoneAlone).toBe(1);
      expect(d.examples.length).toBe(8);
      for (const x of d.examples) {
        expect(x.labels).toContain(d.name);
        expect(x.labels).not.toContain(d.name === 'blue' ? 'square' : 'blue');
      }
      // Highest first.
      for (let i = 1; i < d.examples.length; i++) expect(d.examples[i].value).toBeLessThanOrEqual(d.examples[i - 1].value);
    }
    expect(e.none.mean!).toBeLessThan(0.0015);
    expect(e.none.n + e.drivers[0].alone.n + e.drivers[1].alone.n + e.drivers[0].withOthers.n).toBe(3000);
    expect(e.formulas.effect).toContain('−');
  });

  it.skipIf(!hasNumpy)('has the counts and means numpy computes from the exported activations and labels.csv', async () => {
    const unit = unitOf('blue+square');
    const npy = path.join(dir, 'planted.npy');
    await api['export.activations']({ study, out: npy, layer: 'planted' });
    const e = await api['unit.evidence']({ study, layer: 'planted', unit });
    const script = `
import csv, json, sys
import numpy as np
npy, labels_csv, unit = sys.argv[1], sys.argv[2], int(sys.argv[3])
a = np.load(npy)[:, unit].astype(np.float64)
has = {'blue': np.zeros(len(a), bool), 'square': np.zeros(len(a), bool)}
with open(labels_csv) as f:
    for row in csv.DictReader(f):
        if row['label'] in has: has[row['label']][int(row['probe'])] = True
b, s = has['blue'], has['square']
groups = {'blue': b & ~s, 'square': s & ~b, 'both': b & s, 'none': ~b & ~s}
print(json.dumps({k: [int(g.sum()), float(a[g].mean())] for k, g in groups.items()}))`;
    const py = spawnSync(SYSTEM_PYTHON, ['-c', script, npy, path.join(probes, 'labels.csv'), String(unit)], { encoding: 'utf8' });
    expect(py.stderr).toBe('');
    const ref = JSON.parse(py.stdout) as Record<string, [number, number]>;
    const blue = e.drivers.find((d) => d.name === 'blue')!;
    const square = e.drivers.find((d) => d.name === 'square')!;
    expect(blue.alone.n).toBe(ref.blue[0]);
    expect(blue.alone.mean!).toBeCloseTo(ref.blue[1], 6);
    expect(square.alone.n).toBe(ref.square[0]);
    expect(square.alone.mean!).toBeCloseTo(ref.square[1], 6);
    expect(blue.withOthers.n).toBe(ref.both[0]);
    expect(blue.withOthers.mean!).toBeCloseTo(ref.both[1], 6);
    expect(e.none.n).toBe(ref.none[0]);
    expect(e.none.mean!).toBeCloseTo(ref.none[1], 6);
  });
  if (!hasNumpy) console.warn('SKIPPED: numpy cross-check of unit.evidence (install python3-numpy to run it)');

  it('takes a driver list of the caller, compounds included, and names a label it does not know', async () => {
    const e = await api['unit.evidence']({ study, layer: 'planted', unit: unitOf('blue+square'), drivers: [['blue', 'square']], examples: 3 });
    expect(e.driverSource).toBe('request');
    expect(e.drivers[0].name).toBe('blue & square');
    expect(e.drivers[0].share).toBeNull();
    // Only one driver: every probe with both parts is "alone"; its mean is ≈2, and the rest (with at most one part) is "none".
    expect(e.drivers[0].alone.mean!).toBeGreaterThan(1.998);
    expect(e.drivers[0].withOthers.n).toBe(0);
    expect(e.drivers[0].examples).toHaveLength(3);
    await expect(dispatch(api, {}, 'unit.evidence', { study, layer: 'planted', unit: 0, drivers: [['blue', 'mauve']] }))
      .rejects.toMatchObject({ code: 'request', where: 'drivers.0.1', message: expect.stringContaining('"mauve"') });
    await expect(dispatch(api, {}, 'unit.evidence', { study, layer: 'planted', unit: 0, drivers: [['a', 'b', 'c', 'd']] }))
      .rejects.toMatchObject({ code: 'request', where: 'drivers.0' });
    await expect(dispatch(api, {}, 'unit.evidence', { study, layer: 'planted', unit: 99 }))
      .rejects.toMatchObject({ code: 'request', message: expect.stringContaining('out of range') });
  });

  it('says why the unit ranks where it does: its neighbours in the stored ranking', async () => {
    const rows = await api['study.rank']({ study });
    const i = rows.findIndex((r) => r.unit === unitOf('blue+square'));
    const e = await api['unit.evidence']({ study, layer: 'planted', unit: unitOf('blue+square') });
    expect(e.ranking.rank).toBe(i);
    expect(e.ranking.total).toBe(PLANTED_UNITS.length);
    expect(e.ranking.above?.unit ?? null).toBe(i > 0 ? rows[i - 1].unit : null);
    expect(e.ranking.below?.unit ?? null).toBe(i + 1 < rows.length ? rows[i + 1].unit : null);
    if (e.ranking.above) expect(e.ranking.above.conceptCount).toBeCloseTo(rows[i - 1].conceptCount, 12);
  });

  it('for the dead unit: no drivers, every probe in "none"', async () => {
    const e = await api['unit.evidence']({ study, layer: 'planted', unit: unitOf('dead') });
    expect(e.drivers).toEqual([]);
    expect(e.none.n).toBe(3000);
    expect(e.ranking.flags).toContain('dead');
  });
});
