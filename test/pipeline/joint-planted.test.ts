/**
 * The planted joint-model units (test/support/joint-fixtures.ts) as a real ONNX Gemm + Relu, scanned by onnxruntime
 * into a SQLite study and read back through the API as `skein rank --json` and the stored driver table give them.
 * Expected values come from the construction (weights set by hand).
 */
import path from 'node:path';
import Database from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, runScan } from '../../core/api/index.ts';
import type { RankRow } from '../../core/api/contract.ts';
import { JOINT_CASES, writeJointPlanted } from '../support/joint-fixtures.ts';
import { tempDir } from '../support/fixtures.ts';
import { readAllDrivers, readLayerNulls } from '../../core/store/drivers.ts';
import { readLayers } from '../../core/store/binding.ts';

describe('planted joint-model units through onnxruntime and a study file', () => {
  let rows: RankRow[];
  let study: string;

  beforeAll(async () => {
    const dir = tempDir();
    const { model, probes } = writeJointPlanted(dir);
    study = path.join(dir, 'joint.study');
    await runScan({ model, probes, study, batch: 500, layers: ['planted'] });
    rows = await createApi()['study.rank']({ study, layer: 'planted' });
  });

  JOINT_CASES.forEach((c, u) => {
    it(`${c.name}: ${c.drivers.join(', ') || 'no driver'}${c.formula ? `, formula ${c.formula}` : ''}`, () => {
      const r = rows.find((x) => x.unit === u)!;
      expect(r.flags).toEqual(c.flags ?? []);
      expect(r.drivers.map((d) => d.label).sort()).toEqual([...c.drivers].sort());
      expect(r.modulators.map((m) => m.label)).toEqual(c.modulators ?? []);
      expect(r.nested.map((x) => x.label)).toEqual(c.nested ?? []);
      expect(r.conceptCount).toBeGreaterThanOrEqual(c.count[0] - 1e-9);
      expect(r.conceptCount).toBeLessThanOrEqual(c.count[1] + 1e-9);
      if (c.formula) {
        expect(r.explanation!.formula.split(' | ').sort()).toEqual(c.formula.split(' | ').sort());
        expect(r.explanation!.iou).toBeGreaterThanOrEqual(c.minIou);
      }
    });
  });

  it('stores one normalised row per driver, modulator and nested label, and the shuffled-label baseline', () => {
    const db = new Database(study, { readonly: true });
    try {
      const layer = readLayers(db).find((l) => l.name === 'planted')!;
      const records = [...readAllDrivers(db, layer.id).values()].flat();
      const count = (kind: string) => records.filter((r) => r.kind === kind).length;
      expect(count('driver')).toBe(JOINT_CASES.reduce((t, c) => t + c.drivers.length, 0));
      expect(count('modulator')).toBe(1);
      expect(count('nested')).toBe(1);
      const conj = readAllDrivers(db, layer.id).get(`${layer.id}:0`)!;
      expect(conj).toHaveLength(1);
      expect(conj[0].labels).toHaveLength(2); // a & b: one compound row
      expect(conj[0].share).toBe(1);
      const base = readLayerNulls(db).find((n) => n.layerId === layer.id)!;
      expect(base.unitsSampled).toBe(JOINT_CASES.length);
      expect(base.mixedReal).toBe(3); // the three either-or units
      expect(base.mixedExpected).toBe(0); // shuffled labels call nothing mixed here
    } finally {
      db.close();
    }
  });
});
