/**
 * The command-line contract other tools depend on: command names, exit codes, one-line errors and the JSON
 * fields of `skein rank --json`, checked on a real scan of the planted model. The .npy export is read back by
 * numpy itself (Debian's python3-numpy) when it is installed: the NumPy format is numpy's to define.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parse } from 'csv-parse/sync';
import { tempDir, writePlanted, PLANTED_UNITS } from '../support/fixtures.ts';

const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');
const skein = (...args: string[]) => spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });
const SYSTEM_PYTHON = '/usr/bin/python3';
const hasNumpy = fs.existsSync(SYSTEM_PYTHON) && spawnSync(SYSTEM_PYTHON, ['-c', 'import numpy'], { encoding: 'utf8' }).status === 0;

describe('skein CLI', () => {
  let dir: string;
  let model: string;
  let probes: string;
  let study: string;

  beforeAll(() => {
    dir = tempDir();
    ({ model, probes } = writePlanted(dir, 3000, 5));
    study = path.join(dir, 'cli.study');
    const r = skein('scan', model, probes, '--study', study, '--batch', '64');
    expect(r.status, r.stderr).toBe(0);
  });

  it('lists layers with the default selection', () => {
    const r = skein('layers', model, '--json');
    expect(r.status).toBe(0);
    const info = JSON.parse(r.stdout);
    const planted = info.tensors.find((t: { name: string }) => t.name === 'planted');
    expect(planted).toMatchObject({ op: 'Relu', node: 'act', capturable: true, isDefault: true });
    expect(info.tensors.find((t: { name: string }) => t.name === 'pre').isDefault).toBe(false);
  });

  it('prints rank --json with the fixed fields, most polysemantic first', () => {
    const r = skein('rank', study, '--json');
    expect(r.status).toBe(0);
    const rows = JSON.parse(r.stdout);
    expect(rows.length).toBe(PLANTED_UNITS.length + 2); // planted + logits layers
    for (const row of rows) {
      // the fields other tools read stay; the joint model's are added beside them
      expect(Object.keys(row)).toEqual(expect.arrayContaining(['conceptCount', 'drivers', 'explanation', 'flags', 'layer', 'selectivity', 'unit', 'conceptLow', 'conceptHigh', 'modulators', 'nested']));
      for (const d of row.drivers) expect(Object.keys(d)).toEqual(expect.arrayContaining(['auroc', 'label', 'q', 'share', 'shareLow', 'shareHigh', 'labels']));
      if (row.explanation) expect(Object.keys(row.explanation)).toEqual(expect.arrayContaining(['formula', 'iou', 'threshold', 'basis']));
    }
    // ranked on the conservative figure: the lower end of the concept count's interval
    const unflagged = rows.filter((x: { flags: string[] }) => x.flags.length === 0).map((x: { conceptLow: number }) => x.conceptLow);
    expect(unflagged).toEqual([...unflagged].sort((a, b) => b - a));
    const planted = skein('rank', study, '--layer', 'planted', '--top', '2', '--json');
    const top2 = JSON.parse(planted.stdout);
    expect(top2).toHaveLength(2);
    expect(top2.every((x: { layer: string }) => x.layer === 'planted')).toBe(true);
  });

  it('shows one unit with every label statistic and its top examples', () => {
    const r = skein('unit', study, 'planted', '0', '--json');
    expect(r.status).toBe(0);
    const u = JSON.parse(r.stdout);
    expect(u.stats).toHaveLength(14);
    expect(u.topExamples).toHaveLength(24); // defaultScoreOptions.topExamples; the probe set is far larger
    for (let i = 1; i < 24; i++) expect(u.topExamples[i - 1].value).toBeGreaterThanOrEqual(u.topExamples[i].value);
    const text = skein('unit', study, 'planted', '0');
    expect(text.stdout).toContain('not proof');
  });

  it('exports scores as CSV and JSON', () => {
    const csv = path.join(dir, 'scores.csv');
    expect(skein('export', study, '--scores', csv).status).toBe(0);
    const records = parse(fs.readFileSync(csv), { columns: true }) as Record<string, string>[];
    expect(records).toHaveLength(PLANTED_UNITS.length + 2);
    expect(Object.keys(records[0])).toContain('concept_count');
    const json = path.join(dir, 'scores.json');
    expect(skein('export', study, '--scores', json).status).toBe(0);
    expect(JSON.parse(fs.readFileSync(json, 'utf8'))).toHaveLength(PLANTED_UNITS.length + 2);
  });

  it.skipIf(!hasNumpy)('exports activations that numpy.load reads as N × units float32', () => {
    const out = path.join(dir, 'planted.npy');
    expect(skein('export', study, '--activations', out, '--layer', 'planted').status).toBe(0);
    // Cross-check one column against `skein unit`'s top example (probe index → value).
    const u = JSON.parse(skein('unit', study, 'planted', '0', '--json').stdout);
    const top = u.topExamples[0];
    const py = spawnSync(SYSTEM_PYTHON, ['-c', `import numpy as np; a = np.load(${JSON.stringify(out)}); print(a.dtype, a.shape, float(a[${top.probe}, 0]))`], { encoding: 'utf8' });
    expect(py.status, py.stderr).toBe(0);
    const [dtype, ...rest] = py.stdout.trim().split(' ');
    expect(dtype).toBe('float32');
    expect(rest.slice(0, 2).join(' ')).toBe(`(3000, ${PLANTED_UNITS.length})`);
    expect(Number(rest[2])).toBeCloseTo(top.value, 6);
  });
  if (!hasNumpy) console.warn('SKIPPED: numpy.load check (install python3-numpy to run it)');

  it('fails with one line naming the cause and a non-zero exit', () => {
    const missing = skein('rank', path.join(dir, 'nope.study'));
    expect(missing.status).toBe(1);
    expect(missing.stderr.trim().split('\n')).toHaveLength(1);
    expect(missing.stderr).toContain('nope.study');
    const badLayer = skein('rank', study, '--layer', 'nosuch');
    expect(badLayer.status).toBe(1);
    expect(badLayer.stderr).toContain('No layer "nosuch"');
    const badUnit = skein('unit', study, 'planted', '99');
    expect(badUnit.stderr).toContain('out of range');
    const notModel = path.join(dir, 'fake.onnx');
    fs.writeFileSync(notModel, 'this is not a model');
    const scan = skein('scan', notModel, probes, '--study', path.join(dir, 'x.study'));
    expect(scan.status).toBe(1);
    expect(scan.stderr.trim().split('\n')).toHaveLength(1);
    expect(scan.stderr).toContain('fake.onnx');
    const usage = skein('scan', model);
    expect(usage.status).toBe(2);
  });
});
