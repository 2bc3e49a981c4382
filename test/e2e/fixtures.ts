/** Models and probe sets the e2e makes for itself (invented for the tests; the demo scenario is sample-data's). */
import fs from 'node:fs';
import path from 'node:path';
import { buildModel } from '../../core/model/writer.ts';
import { rng, writeProbeSet } from '../support/fixtures.ts';

export interface Fixture { model: string; probes: string; study: string }

const DIRECTIONS = ['north', 'south', 'east', 'west'];

/** 10^5 units (x[4] → MatMul → Relu, random weights) on 120 probes: enough rows to show the roster's windowing. */
export function wideFixture(dir: string): Fixture {
  fs.mkdirSync(dir, { recursive: true });
  const units = 100_000;
  const width = 4;
  const n = 120;
  const r = rng(3);
  const model = path.join(dir, 'wide.onnx');
  fs.writeFileSync(model, buildModel({
    name: 'wide', inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', width] }], outputs: [{ name: 'h', elemType: 'float32', dims: ['batch', units] }],
    initializers: [{ name: 'W', dims: [width, units], data: new Float32Array(width * units).map(() => r() * 2 - 1) }],
    nodes: [{ op: 'MatMul', inputs: ['x', 'W'], outputs: ['pre'] }, { op: 'Relu', inputs: ['pre'], outputs: ['h'] }],
  }));
  const rows = new Float32Array(n * width);
  const labels: string[][] = [];
  for (let p = 0; p < n; p++) {
    labels.push([DIRECTIONS[p % 4]]);
    rows[p * width + (p % 4)] = 1;
    rows[p * width + ((p + 1) % 4)] = r() * 0.3;
  }
  const probes = writeProbeSet({ dir: path.join(dir, 'wide-probes'), inputName: 'x', rows, rowShape: [width], labels });
  return { model, probes, study: path.join(dir, 'wide.study') };
}

/**
 * A model that is slow per probe but has few units (two 3×3 convolutions, 3→C→C channels, on S×S inputs), so a scan
 * scanned one probe at a time takes long enough to watch its progress and stop it part-way.
 */
export function slowFixture(dir: string, opts: { probes?: number; size?: number; channels?: number } = {}): Fixture {
  fs.mkdirSync(dir, { recursive: true });
  const n = opts.probes ?? 400;
  const s = opts.size ?? 32;
  const c = opts.channels ?? 64;
  const r = rng(11);
  const weights = (count: number, scale: number) => new Float32Array(count).map(() => (r() * 2 - 1) * scale);
  const model = path.join(dir, 'slow.onnx');
  fs.writeFileSync(model, buildModel({
    name: 'slow',
    inputs: [{ name: 'image', elemType: 'float32', dims: ['batch', 3, s, s] }],
    outputs: [{ name: 'deep', elemType: 'float32', dims: ['batch', c, s, s] }],
    initializers: [
      { name: 'W1', dims: [c, 3, 3, 3], data: weights(c * 27, 0.3) },
      { name: 'W2', dims: [c, c, 3, 3], data: weights(c * c * 9, 0.05) },
    ],
    nodes: [
      { op: 'Conv', inputs: ['image', 'W1'], outputs: ['c1'], attributes: { pads: { ints: [1, 1, 1, 1] }, kernel_shape: { ints: [3, 3] } } },
      { op: 'Relu', inputs: ['c1'], outputs: ['shallow'] },
      { op: 'Conv', inputs: ['shallow', 'W2'], outputs: ['c2'], attributes: { pads: { ints: [1, 1, 1, 1] }, kernel_shape: { ints: [3, 3] } } },
      { op: 'Relu', inputs: ['c2'], outputs: ['deep'] },
    ],
  }));
  const rows = new Float32Array(n * 3 * s * s).map(() => r());
  const labels = Array.from({ length: n }, (_, p) => [DIRECTIONS[p % 4]]);
  const probes = writeProbeSet({ dir: path.join(dir, 'slow-probes'), inputName: 'image', rows, rowShape: [3, s, s], labels });
  return { model, probes, study: path.join(dir, 'slow.study') };
}
