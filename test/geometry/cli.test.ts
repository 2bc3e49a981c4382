/**
 * `skein lens` on the demo: the narrow layer shows what its model was built for (12 labels through 5 units: more
 * decodable concepts than units, with interference), the result is cached, exports are complete and the .npy of
 * the directions reads back in numpy (Debian's python3-numpy: the format is numpy's to define).
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, runScan } from '../../core/api/index.ts';
import { demoPaths } from '../../core/cli/main.ts';
import type { LensResult } from '../../core/api/contract.ts';
import { tempDir } from '../support/fixtures.ts';

const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');
const skein = (...args: string[]) => spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });
const PYTHON = '/usr/bin/python3';
const hasNumpy = fs.existsSync(PYTHON) && spawnSync(PYTHON, ['-c', 'import numpy']).status === 0;

describe('skein lens', () => {
  let dir: string;
  let study: string;
  beforeAll(async () => {
    dir = tempDir('skein-lens-cli-');
    study = path.join(dir, 'demo.study');
    await runScan({ ...demoPaths, study, layers: ['relu_narrow', 'relu_wide'] });
  }, 120_000);

  it('a cancelled lens job says so and stores nothing', async () => {
    const api = createApi();
    const { job } = await api['lens.start']({ study, layer: 'relu_wide' });
    await api['lens.cancel']({ job });
    let s = await api['lens.job']({ job });
    while (s.state === 'running') {
      await new Promise((r) => setTimeout(r, 10));
      s = await api['lens.job']({ job });
    }
    expect(s.state).toBe('cancelled');
    expect(s.error?.message).toMatch(/cancelled; nothing was saved/);
    expect((await api['lens.get']({ study, layer: 'relu_wide' })).state).toBe('missing');
  });

  it('the demo narrow layer packs more decodable concepts than it has units, with measured interference', () => {
    const r = skein('lens', study, '--layer', 'relu_narrow', '--json', '--export', path.join(dir, 'out'));
    expect(r.status, r.stderr).toBe(0);
    const lens = JSON.parse(r.stdout) as LensResult;
    expect(lens.units).toBe(5);
    expect(lens.decodableCount).toBeGreaterThan(lens.units);
    expect(lens.effectiveDimensions).toBeLessThanOrEqual(lens.units);
    expect(lens.conceptsPerDimension).toBeGreaterThan(1);
    for (const c of lens.concepts.filter((x) => x.carried)) expect(c.interference).toBeGreaterThan(0);
    expect(lens.mostInterfering).not.toBeNull();
    expect(lens.summary).toMatch(/^5 units, about [\d.]+ effective dimensions, \d+ decodable concepts: [\d.]+ per dimension\./);
    expect(lens.caution).toMatch(/not proof/);
    // The wide layer has room: its concepts interfere less per concept than the narrow one's.
    const wide = JSON.parse(skein('lens', study, '--layer', 'relu_wide', '--json').stdout) as LensResult;
    const meanDim = (l: LensResult) => l.concepts.filter((c) => c.carried).reduce((s, c) => s + c.dimensionality, 0) / l.concepts.filter((c) => c.carried).length;
    expect(meanDim(wide)).toBeGreaterThan(meanDim(lens));
    // Compound drivers of the joint driver model join as concepts of their own; the headline counts stay over labels.
    const compounds = wide.concepts.filter((c) => c.kind === 'compound');
    expect(compounds.length).toBeGreaterThan(0);
    for (const c of compounds) {
      const parts = c.name.split(' & ').map((n) => wide.concepts.find((x) => x.name === n && x.kind === 'label')!);
      expect(parts.length).toBeGreaterThanOrEqual(2);
      expect(c.positives).toBeLessThanOrEqual(Math.min(...parts.map((p) => p.positives)));
    }
    expect(wide.decodableCount).toBeLessThanOrEqual(12);
    expect(wide.summary).toMatch(/compound drivers are decodable too/);
  });

  it('reuses the cached result and says so', () => {
    const r = skein('lens', study, '--layer', 'relu_narrow');
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/relu_narrow: 5 units, 1200 probes, 5-fold, seed 12, cached/);
    expect(r.stdout).toMatch(/not proof/);
  });

  it('exports every figure; the directions read back in numpy', () => {
    const out = path.join(dir, 'out');
    const names = fs.readdirSync(out).sort();
    expect(names).toEqual(['relu_narrow.concepts.csv', 'relu_narrow.cosine.csv', 'relu_narrow.directions.npy', 'relu_narrow.lens.json', 'relu_narrow.localisation.csv', 'relu_narrow.projection.csv', 'relu_narrow.summary.csv']);
    const lens = JSON.parse(fs.readFileSync(path.join(out, 'relu_narrow.lens.json'), 'utf8')) as LensResult;
    if (!hasNumpy) return console.warn('SKIPPED: numpy read-back of directions.npy (no /usr/bin/python3 numpy)');
    const py = spawnSync(PYTHON, ['-c', 'import numpy as np, sys, json; a = np.load(sys.argv[1]); print(json.dumps({"shape": a.shape, "norms": np.linalg.norm(a.astype(np.float64), axis=1).tolist()}))', path.join(out, 'relu_narrow.directions.npy')], { encoding: 'utf8' });
    const got = JSON.parse(py.stdout);
    expect(got.shape).toEqual([12, 5]);
    got.norms.forEach((n: number, i: number) => expect(Math.abs(n - lens.concepts[i].norm)).toBeLessThan(1e-5 * Math.max(1, lens.concepts[i].norm)));
  });

  it('names the layer at fault and what to do', () => {
    const r = skein('lens', study, '--layer', 'nope');
    expect(r.status).toBe(1);
    expect(r.stderr).toMatch(/No layer "nope" in this study\. Layers: relu_narrow, relu_wide/);
    const e = skein('lens', study, '--layer', 'relu_narrow', '--export', path.join(dir, 'out', 'relu_narrow.lens.json'));
    expect(e.status).toBe(1);
    expect(e.stderr).toMatch(/give a folder name, not a file/);
    expect(skein('lens').status).toBe(2);
  });
});
