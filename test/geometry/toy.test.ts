/**
 * The lens on toy models of superposition with known geometry, scanned through Skein's own pipeline (real
 * onnxruntime, a real study file). Expected values: the published geometries of Elhage et al. 2022, "Toy Models
 * of Superposition" (from memory): a pentagon gives each of 5 features D = 2/5; an antipodal pair D = 1/2; dense
 * features: the two most important D = 1, the rest D = 0. Tolerance ±0.05 (the issue's). And the measured concept
 * directions must point along the model's own weight columns (|cos| ≥ 0.95).
 */
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runScan, createApi } from '../../core/api/index.ts';
import type { LensResult } from '../../core/api/contract.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { findLayer } from '../../core/store/binding.ts';
import { readLens } from '../../core/store/geometry.ts';
import { tempDir } from '../support/fixtures.ts';
import { TOYS, toyOnnx, trainToy, weightColumn, writeToyProbes, type ToyModel, type ToySpec } from './toy-models.ts';

interface Scanned { model: ToyModel; result: LensResult; directions: Float32Array; study: string }

async function scanToy(spec: ToySpec): Promise<Scanned> {
  const dir = tempDir('skein-toy-');
  const model = trainToy(spec);
  const modelPath = path.join(dir, `${spec.name}.onnx`);
  fs.writeFileSync(modelPath, toyOnnx(model));
  const probes = writeToyProbes(model, path.join(dir, 'probes'), 6000, spec.seed + 7);
  const study = path.join(dir, `${spec.name}.study`);
  await runScan({ model: modelPath, probes, study, layers: ['hidden'], batch: 1000 });
  const api = createApi();
  const { job } = await api['lens.start']({ study, layer: 'hidden' });
  for (;;) {
    const s = await api['lens.job']({ job });
    if (s.state === 'done') break;
    if (s.state !== 'running') throw new Error(s.error?.message);
    await new Promise((r) => setTimeout(r, 20));
  }
  const db = openStudyDb(study);
  try {
    const stored = readLens<LensResult>(db, findLayer(db, 'hidden').id)!;
    return { model, result: stored.result, directions: stored.directions, study };
  } finally {
    db.close();
  }
}

const byName = (r: LensResult, name: string) => r.concepts.find((c) => c.name === name)!;

function cosToWeights(s: Scanned, i: number): number {
  const m = s.model.spec.hidden;
  const t = s.result.concepts.findIndex((c) => c.name === `f${i}`);
  const d = Array.from(s.directions.subarray(t * m, (t + 1) * m));
  const w = weightColumn(s.model, i);
  const dot = d.reduce((acc, v, k) => acc + v * w[k], 0);
  return dot / (Math.hypot(...d) * Math.hypot(...w));
}

describe('toy models of superposition through scan and lens', () => {
  const scanned: Partial<Record<keyof typeof TOYS, Scanned>> = {};
  beforeAll(async () => {
    for (const key of Object.keys(TOYS) as (keyof typeof TOYS)[]) scanned[key] = await scanToy(TOYS[key]);
  }, 120_000);

  it('5 sparse features in 2 dimensions: a pentagon, D = 2/5 each', () => {
    const s = scanned.pentagon!;
    for (let i = 0; i < 5; i++) {
      const c = byName(s.result, `f${i}`);
      expect(c.dimensionality).toBeGreaterThan(0.4 - 0.05);
      expect(c.dimensionality).toBeLessThan(0.4 + 0.05);
      expect(c.carried).toBe(true);
      expect(Math.abs(cosToWeights(s, i))).toBeGreaterThanOrEqual(0.95);
    }
    // More concepts than dimensions, and the summary says so.
    expect(s.result.decodableCount).toBeGreaterThan(s.result.units);
    expect(s.result.effectiveDimensions).toBeLessThanOrEqual(2 + 1e-9);
    expect(s.result.projection.kept).toBeCloseTo(1, 6); // a 2-D layer's picture loses nothing
  });

  it('2 sparse features in 1 dimension: antipodal, D = 1/2 each', () => {
    const s = scanned.antipodal!;
    for (let i = 0; i < 2; i++) {
      const c = byName(s.result, `f${i}`);
      expect(Math.abs(c.dimensionality - 0.5)).toBeLessThan(0.05);
      expect(Math.abs(cosToWeights(s, i))).toBeGreaterThanOrEqual(0.95);
    }
    expect(s.result.cosine[0][1]).toBeLessThan(-0.95); // opposite directions
  });

  it('dense features: the two most important get a dimension each, the rest none', () => {
    const s = scanned.dense!;
    for (let i = 0; i < 5; i++) {
      const c = byName(s.result, `f${i}`);
      if (i < 2) {
        expect(Math.abs(c.dimensionality - 1)).toBeLessThan(0.05);
        expect(Math.abs(cosToWeights(s, i))).toBeGreaterThanOrEqual(0.95);
        expect(c.locality === 'local' || c.locality === 'few').toBe(true);
      } else {
        expect(c.dimensionality).toBeLessThan(0.05);
        expect(c.carried).toBe(false); // dropped features are not decodable, so not drawn
      }
    }
    expect(s.result.carriedOrder.map((t) => s.result.concepts[t].name).sort()).toEqual(['f0', 'f1']);
  });

  it('reuses the cached lens until the inputs change', async () => {
    const api = createApi();
    const got = await api['lens.get']({ study: scanned.antipodal!.study, layer: 'hidden' });
    expect(got.state).toBe('ready');
  });
});
