/**
 * A model input the probe set does not provide is fed from manifest "fill", shaped per probe from the inputs it
 * does provide (a symbolic dimension shared with them). ONNX Concat semantics (ONNX operator specification: Concat)
 * make the captured width the sum of both inputs' widths, so a wrongly shaped fill changes the unit count.
 */
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { runScan, createApi } from '../../core/api/index.ts';
import { buildModel } from '../../core/model/writer.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { readBinding, findLayer } from '../../core/store/binding.ts';
import { readUnit } from '../../core/store/activations.ts';
import { tempDir, writeProbeSet } from '../support/fixtures.ts';

describe('filled inputs', () => {
  it('feeds a constant shaped like the provided input it shares a dimension with', async () => {
    const dir = tempDir();
    const width = 6;
    const n = 50;
    fs.writeFileSync(path.join(dir, 'm.onnx'), buildModel({
      name: 'fill',
      inputs: [
        { name: 'x', elemType: 'float32', dims: ['batch', 'width'] },
        { name: 'mask', elemType: 'float32', dims: ['batch', 'width'] },
      ],
      outputs: [{ name: 'out', elemType: 'float32', dims: ['batch', 'twice'] }],
      initializers: [],
      nodes: [
        { op: 'Concat', name: 'join', inputs: ['x', 'mask'], outputs: ['joined'], attributes: { axis: { i: 1 } } },
        { op: 'Relu', name: 'act', inputs: ['joined'], outputs: ['out'] },
      ],
    }));
    const rows = new Float32Array(n * width).map((_, i) => (i % 7) / 7);
    const probes = writeProbeSet({ dir: path.join(dir, 'p'), inputName: 'x', rows, rowShape: [width], labels: Array.from({ length: n }, (_, i) => [i % 2 ? 'odd' : 'even']) });
    const manifest = JSON.parse(fs.readFileSync(path.join(probes, 'manifest.json'), 'utf8'));
    manifest.fill = { mask: 0.25 };
    fs.writeFileSync(path.join(probes, 'manifest.json'), JSON.stringify(manifest));
    const study = path.join(dir, 'f.study');
    const r = await runScan({ model: path.join(dir, 'm.onnx'), probes, study, layers: ['out'] });
    expect(r.layers).toEqual([{ name: 'out', units: 2 * width, kind: 'dense' }]);
    const db = openStudyDb(study);
    const run = readBinding(db)!;
    const layer = findLayer(db, 'out');
    expect(Array.from(readUnit(db, run, layer.id, width))).toEqual(new Array(n).fill(0.25));
    expect(readUnit(db, run, layer.id, 1)[0]).toBeCloseTo(rows[1], 6);
    db.close();
    expect((await createApi()['study.rank']({ study })).length).toBe(2 * width);
  });
});
