import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { SkeinError } from '../../core/errors.ts';
import { createSession, exposeTensors, readModel } from '../../core/model/index.ts';
import { onnx } from '../../core/model/proto.ts';
import { buildModel } from '../../core/model/writer.ts';
import { mlpForward, mlpSpec, mlpWeights, randomArray, seededRandom, tempDir, MLP } from './fixtures.ts';

function caught(fn: () => unknown): SkeinError {
  try {
    fn();
  } catch (e) {
    if (e instanceof SkeinError) return e;
    throw e;
  }
  throw new Error('expected a SkeinError');
}

async function caughtAsync(fn: () => Promise<unknown>): Promise<SkeinError> {
  try {
    await fn();
  } catch (e) {
    if (e instanceof SkeinError) return e;
    throw e;
  }
  throw new Error('expected a SkeinError');
}

function writeModel(bytes: Uint8Array, name = 'model.onnx'): string {
  const path = join(tempDir(), name);
  writeFileSync(path, bytes);
  return path;
}

/** The MLP with W1 moved to an external-data file next to the model (ONNX external data format). */
function externalDataModel(): { dir: string; path: string; dataPath: string } {
  const model = onnx.ModelProto.decode(buildModel(mlpSpec(mlpWeights(8))));
  const dir = tempDir();
  mkdirSync(join(dir, 'weights'));
  const dataPath = join(dir, 'weights', 'w1.bin');
  const w1 = (model.graph?.initializer ?? []).find((t) => t.name === 'W1');
  const raw = w1?.rawData;
  if (!w1 || !raw) throw new Error('fixture: W1 has no raw data');
  // Pad 16 bytes in front so the offset field is exercised.
  writeFileSync(dataPath, Buffer.concat([Buffer.alloc(16), Buffer.from(raw)]));
  w1.externalData = [
    { key: 'location', value: 'weights/w1.bin' }, { key: 'offset', value: '16' }, { key: 'length', value: String(raw.length) },
  ];
  w1.rawData = new Uint8Array(0);
  w1.dataLocation = onnx.TensorProto.DataLocation.EXTERNAL;
  const path = join(dir, 'model.onnx');
  writeFileSync(path, onnx.ModelProto.encode(model).finish());
  return { dir, path, dataPath };
}

describe('readModel', () => {
  it('fingerprints the file bytes with SHA-256', () => {
    const bytes = buildModel(mlpSpec(mlpWeights(1)));
    const path = writeModel(bytes);
    const info = readModel(path);
    // Node's crypto as the reference SHA-256 (FIPS 180-4); a different weight seed changes it.
    expect(info.fingerprint).toBe(createHash('sha256').update(bytes).digest('hex'));
    expect(info.bytes).toBe(bytes.length);
    expect(readModel(writeModel(buildModel(mlpSpec(mlpWeights(2))))).fingerprint).not.toBe(info.fingerprint);
  });

  it('reads external data next to the model, includes it in the fingerprint, and inlines it for onnxruntime', async () => {
    const { path, dataPath } = externalDataModel();
    const info = readModel(path);
    const modelBytes = readFileSync(path);
    const dataBytes = readFileSync(dataPath);
    expect(info.fingerprint).toBe(createHash('sha256').update(modelBytes).update(dataBytes).digest('hex'));
    expect(info.bytes).toBe(modelBytes.length + dataBytes.length);
    expect(info.externalData).toEqual([dataPath]);

    const session = await createSession(exposeTensors(modelBytes, ['act1_out'], { modelPath: path }));
    const x = randomArray(seededRandom(9), 2 * MLP.inputs);
    const out = await session.run({ x: new ort.Tensor('float32', x, [2, MLP.inputs]) });
    const expected = mlpForward(mlpWeights(8), x, 2);
    const got = out.act1_out.data as Float32Array;
    for (let k = 0; k < got.length; k++) expect(Math.abs(got[k] - expected.act1_out[k])).toBeLessThan(1e-5);
    await session.release();

    expect(caught(() => exposeTensors(modelBytes, ['act1_out'])).message).toMatch(/separate data files/);
  });

  it('missing file', () => {
    const path = join(tempDir(), 'absent.onnx');
    const e = caught(() => readModel(path));
    expect(e.code).toBe('model');
    expect(e.file).toBe(path);
    expect(e.message).toMatch(/does not exist/);
  });

  it('random bytes are not an ONNX model', () => {
    // Several seeds: random bytes sometimes decode as protobuf, and must still be refused.
    for (let seed = 1; seed <= 20; seed++) {
      const r = seededRandom(seed);
      const bytes = Uint8Array.from({ length: 2000 }, () => Math.floor(r() * 256));
      const path = writeModel(bytes, 'noise.onnx');
      const e = caught(() => readModel(path));
      expect(e.code).toBe('model');
      expect(e.file).toBe(path);
      expect(e.message).toMatch(/not an ONNX model/);
    }
    const text = writeModel(new TextEncoder().encode('name,label\ncat,1\n'), 'labels.onnx');
    expect(caught(() => readModel(text)).message).toMatch(/not an ONNX model/);
  });

  it('a truncated file (first half of a valid model) says so', () => {
    const bytes = buildModel(mlpSpec(mlpWeights(3)));
    const path = writeModel(bytes.subarray(0, Math.floor(bytes.length / 2)), 'half.onnx');
    const e = caught(() => readModel(path));
    expect(e.code).toBe('model');
    expect(e.file).toBe(path);
    expect(e.message).toMatch(/truncated/);
    expect(e.message).toMatch(/again/);
    // Any cut inside a field reads as truncated, not as a foreign file.
    for (const fraction of [0.02, 0.1, 0.3, 0.7, 0.9, 0.999]) {
      const cut = writeModel(bytes.subarray(0, Math.floor(bytes.length * fraction)), 'cut.onnx');
      expect(caught(() => readModel(cut)).message).toMatch(/truncated/);
    }
  });

  it('a model damaged inside its graph', () => {
    // Well-formed top level (ir_version = 8, then a graph field); inside the graph, tag 0x4f is field 9
    // (reserved in GraphProto) with wire type 7, which protobuf does not define (tag = field << 3 | wire type).
    const bytes = new Uint8Array([0x08, 0x08, 0x3a, 0x02, 0x4f, 0x00]);
    const e = caught(() => readModel(writeModel(bytes, 'damaged.onnx')));
    expect(e.message).toMatch(/damaged/);
    // A graph whose only node is empty (a length-0 node field) decodes, but has no operator type.
    const blank = caught(() => readModel(writeModel(new Uint8Array([0x08, 0x08, 0x3a, 0x02, 0x0a, 0x00]), 'blank.onnx')));
    expect(blank.message).toMatch(/damaged/);
    expect(blank.where).toBe('graph.node[0]');
  });

  it('a model without a graph', () => {
    const path = writeModel(onnx.ModelProto.encode({ irVersion: 8, producerName: 'x' }).finish(), 'empty.onnx');
    const e = caught(() => readModel(path));
    expect(e.where).toBe('graph');
    expect(e.message).toMatch(/no graph/);
  });

  it('a missing external data file is named, with where to put it', () => {
    const { path, dataPath } = externalDataModel();
    rmSync(dataPath);
    const e = caught(() => readModel(path));
    expect(e.code).toBe('model');
    expect(e.file).toBe(path);
    expect(e.message).toContain('weights/w1.bin');
    expect(e.message).toContain('"W1"');
    expect(e.where).toBe('graph.initializer[W1].external_data.location');
  });

  it('a short external data file reads as truncated', () => {
    const { path, dataPath } = externalDataModel();
    writeFileSync(dataPath, readFileSync(dataPath).subarray(0, 40));
    expect(caught(() => readModel(path)).message).toMatch(/truncated/);
  });
});

describe('createSession', () => {
  it('names an operator onnxruntime cannot run (custom domain)', async () => {
    const bytes = buildModel({
      name: 'custom',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, 3] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: [1, 3] }],
      initializers: [],
      nodes: [
        { op: 'Relu', inputs: ['x'], outputs: ['r'] },
        { op: 'Frobnicate', name: 'mystery', domain: 'com.example', inputs: ['r'], outputs: ['y'] },
      ],
    });
    const e = await caughtAsync(() => createSession(bytes, {}, 'custom.onnx'));
    expect(e.code).toBe('model');
    expect(e.file).toBe('custom.onnx');
    expect(e.message).toContain('com.example:Frobnicate');
    expect(e.where).toBe('node mystery');
  });

  it('names an unknown operator in the default domain', async () => {
    const bytes = buildModel({
      name: 'unknown',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, 3] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: [1, 3] }],
      initializers: [],
      nodes: [{ op: 'Wobble', name: 'wobbly', inputs: ['x'], outputs: ['y'] }],
    });
    const e = await caughtAsync(() => createSession(bytes));
    expect(e.message).toContain('Wobble');
    expect(e.where).toBe('node wobbly');
  });
});
