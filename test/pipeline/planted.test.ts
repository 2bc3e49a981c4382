/**
 * The whole pipeline on a model whose units are polysemantic or not by construction (weights set by hand):
 * real onnxruntime, a real SQLite study, the real statistics. Expected values come from the construction and
 * from the Leinster–Cobbold limits (Leinster & Cobbold 2012): one driver → 1; k unrelated equally shared
 * drivers → k; related drivers → strictly between 1 and their number.
 */
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, runScan } from '../../core/api/index.ts';
import type { RankRow } from '../../core/api/contract.ts';
import { PLANTED_UNITS, tempDir, writePlanted } from '../support/fixtures.ts';

const unitIndex = (name: string) => PLANTED_UNITS.findIndex((u) => u.name === name);

describe('planted model through scan and rank', () => {
  let rows: RankRow[];
  let study: string;

  beforeAll(async () => {
    const dir = tempDir();
    const { model, probes } = writePlanted(dir);
    study = path.join(dir, 'planted.study');
    const r = await runScan({ model, probes, study, batch: 100, layers: ['planted'] });
    expect(r.layers.map((l) => l.name)).toEqual(['planted']);
    rows = await createApi()['study.rank']({ study });
  });

  it('ranks most polysemantic first, flagged units last, exactly as built', () => {
    const order = rows.map((r) => PLANTED_UNITS[r.unit].name);
    expect(order.slice(0, 3)).toEqual(['red+circle+top', 'blue+square', 'red+orange']);
    expect(new Set(order.slice(3, 5))).toEqual(new Set(['mono-red', 'mono-star']));
    expect(new Set(order.slice(5))).toEqual(new Set(['dead', 'dense']));
  });

  it('counts concepts as constructed', () => {
    const by = (name: string) => rows.find((r) => r.unit === unitIndex(name))!;
    expect(by('red+circle+top').conceptCount).toBeCloseTo(3, 1);
    expect(by('blue+square').conceptCount).toBeCloseTo(2, 1);
    const related = by('red+orange').conceptCount;
    expect(related).toBeGreaterThan(1.01);
    expect(related).toBeLessThan(1.9);
    expect(by('mono-red').conceptCount).toBeCloseTo(1, 6);
    expect(by('mono-star').conceptCount).toBeCloseTo(1, 6);
  });

  it('names the planted drivers and nothing else', () => {
    const drivers = (name: string) => new Set(rows.find((r) => r.unit === unitIndex(name))!.drivers.map((d) => d.label));
    expect(drivers('mono-red')).toEqual(new Set(['red']));
    expect(drivers('mono-star')).toEqual(new Set(['star']));
    expect(drivers('blue+square')).toEqual(new Set(['blue', 'square']));
    expect(drivers('red+orange')).toEqual(new Set(['red', 'orange']));
    expect(drivers('red+circle+top')).toEqual(new Set(['red', 'circle', 'top']));
    for (const r of rows) {
      const shares = r.drivers.reduce((s, d) => s + d.share, 0);
      if (r.drivers.length) expect(shares).toBeCloseTo(1, 9);
    }
  });

  it('flags the dead and the dense unit and only them', () => {
    const flags = Object.fromEntries(rows.map((r) => [PLANTED_UNITS[r.unit].name, r.flags]));
    expect(flags['dead']).toEqual(['dead']);
    expect(flags['dense']).toEqual(['dense']);
    for (const name of ['mono-red', 'blue+square', 'red+orange', 'red+circle+top', 'mono-star']) expect(flags[name]).toEqual([]);
    expect(rows.find((r) => r.unit === unitIndex('dead'))!.drivers).toEqual([]);
  });

  it('explains a monosemantic unit by its one label', () => {
    const mono = rows.find((r) => r.unit === unitIndex('mono-star'))!;
    expect(mono.explanation?.formula).toBe('star');
    expect(mono.explanation?.iou).toBeGreaterThan(0.95);
  });

  it('reuses everything on a rerun', async () => {
    const dir = path.dirname(study);
    const again = await runScan({ model: path.join(dir, 'planted.onnx'), probes: path.join(dir, 'planted-probes'), study, batch: 37, layers: ['planted'] });
    expect(again.chunksComputed).toBe(0);
    expect(again.scoresReused).toBe(true);
  });
});
