import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { SkeinError } from '../../core/errors.ts';
import {
  batchPolicy, createSession, exposeTensors, readModel, unitLayout, SUBGRAPH_REASON, type ModelInfo,
} from '../../core/model/index.ts';
import { buildModel, type GraphSpec } from '../../core/model/writer.ts';
import { cnnSpec, cnnWeights, mlpSpec, mlpWeights, randomArray, seededRandom, tempDir } from './fixtures.ts';

function read(spec: GraphSpec): { info: ModelInfo; bytes: Uint8Array; path: string } {
  const path = join(tempDir(), `${spec.name}.onnx`);
  const bytes = buildModel(spec);
  writeFileSync(path, bytes);
  return { info: readModel(path), bytes, path };
}

const defaults = (info: ModelInfo) => info.tensors.filter((t) => t.isDefault).map((t) => t.name);
const f32 = (...v: number[]) => new Float32Array(v);
const i64 = (...v: number[]) => BigInt64Array.from(v.map(BigInt));

// Expected listings below follow the rules documented in core/model/tensors.ts (common practice, no source).
describe('tensor listing and default selection', () => {
  it('MLP: activations are default, their Gemm inputs are not, the last Gemm is', () => {
    const { info } = read(mlpSpec(mlpWeights(1)));
    expect(info.tensors.map((t) => [t.name, t.op, t.node, t.elemType, t.capturable])).toEqual([
      ['fc1_out', 'Gemm', 'fc1', 'float32', true],
      ['act1_out', 'Relu', 'act1', 'float32', true],
      ['fc2_out', 'Gemm', 'fc2', 'float32', true],
      ['act2_out', 'Tanh', 'act2', 'float32', true],
      ['logits', 'Gemm', 'fc3', 'float32', true],
    ]);
    expect(defaults(info)).toEqual(['act1_out', 'act2_out', 'logits']);
    // Gemm: [M, K]·[N, K]ᵀ → [M, N] (ONNX operator specification: Gemm); the symbolic batch is kept.
    expect(info.tensors[0].dims).toEqual(['batch', 5]);
    expect(info.tensors[3].dims).toEqual(['batch', 6]);
    expect(info.inputs).toEqual([{ name: 'x', elemType: 'float32', dims: ['batch', 4] }]);
    expect(info.outputs).toEqual([{ name: 'logits', elemType: 'float32', dims: ['batch', 3] }]);
    expect(info.opsetVersion).toBe(17);
    expect(info.producer).toBe('skein-writer 1');
  });

  it('CNN: inferred shapes through Conv, MaxPool and Flatten; Relu and the head are default', () => {
    const { info } = read(cnnSpec(cnnWeights(2)));
    // Conv out = floor((6 + 1 + 1 − 3)/1) + 1 = 6; MaxPool out = floor((6 − 2)/2) + 1 = 3 (ONNX operator specification).
    expect(info.tensors.map((t) => [t.name, t.dims])).toEqual([
      ['conv_out', ['N', 3, 6, 6]],
      ['relu_out', ['N', 3, 6, 6]],
      ['pool_out', ['N', 3, 3, 3]],
      ['flat_out', ['N', 27]],
      ['scores', ['N', 4]],
    ]);
    expect(defaults(info)).toEqual(['relu_out', 'scores']);
  });

  it('Softmax output is listed but not default; the logits before it are', () => {
    const { info } = read({
      name: 'softmax_head',
      inputs: [{ name: 'x', elemType: 'float32', dims: [2, 3] }],
      outputs: [{ name: 'probs', elemType: 'float32', dims: [2, 2] }],
      initializers: [{ name: 'W', dims: [3, 2], data: f32(1, 2, 3, 4, 5, 6) }],
      nodes: [
        { op: 'MatMul', inputs: ['x', 'W'], outputs: ['logits'] },
        { op: 'Softmax', inputs: ['logits'], outputs: ['probs'], attributes: { axis: { i: -1 } } },
      ],
    });
    expect(info.tensors.map((t) => t.name)).toEqual(['logits', 'probs']);
    expect(defaults(info)).toEqual(['logits']);
    expect(info.tensors[0].dims).toEqual([2, 2]);
  });

  it('recognises SiLU (x·Sigmoid(x)), erf-Gelu, bounded-ReLU Clip and bias chains', () => {
    const r = seededRandom(3);
    const { info } = read({
      name: 'patterns',
      opset: 17,
      inputs: [{ name: 'x', elemType: 'float32', dims: ['b', 4] }],
      outputs: [{ name: 'out', elemType: 'float32', dims: ['b', 4] }],
      initializers: [
        { name: 'W1', dims: [4, 4], data: randomArray(r, 16) }, { name: 'b1', dims: [4], data: randomArray(r, 4) },
        { name: 'W2', dims: [4, 4], data: randomArray(r, 16) }, { name: 'b2', dims: [4], data: randomArray(r, 4) },
        { name: 'W3', dims: [4, 4], data: randomArray(r, 16) },
        { name: 'W4', dims: [4, 4], data: randomArray(r, 16) },
        { name: 'sqrt2', dims: [], data: f32(Math.SQRT2) }, { name: 'one', dims: [], data: f32(1) },
        { name: 'half', dims: [], data: f32(0.5) }, { name: 'zero', dims: [], data: f32(0) },
        { name: 'six', dims: [], data: f32(6) }, { name: 'minus1', dims: [], data: f32(-1) },
      ],
      nodes: [
        // layer 1 + SiLU: MatMul → Add(bias) → Sigmoid, Mul
        { op: 'MatMul', inputs: ['x', 'W1'], outputs: ['mm1'] },
        { op: 'Add', inputs: ['mm1', 'b1'], outputs: ['pre1'] },
        { op: 'Sigmoid', inputs: ['pre1'], outputs: ['gate1'] },
        { op: 'Mul', inputs: ['pre1', 'gate1'], outputs: ['silu1'] },
        // layer 2 + Gelu as exported: x·0.5·(1 + erf(x/√2))
        { op: 'MatMul', inputs: ['silu1', 'W2'], outputs: ['mm2'] },
        { op: 'Add', inputs: ['b2', 'mm2'], outputs: ['pre2'] },
        { op: 'Div', inputs: ['pre2', 'sqrt2'], outputs: ['g_div'] },
        { op: 'Erf', inputs: ['g_div'], outputs: ['g_erf'] },
        { op: 'Add', inputs: ['g_erf', 'one'], outputs: ['g_add'] },
        { op: 'Mul', inputs: ['pre2', 'g_add'], outputs: ['g_mul'] },
        { op: 'Mul', inputs: ['g_mul', 'half'], outputs: ['gelu2'] },
        // layer 3 + Clip(0, 6): a bounded ReLU
        { op: 'MatMul', inputs: ['gelu2', 'W3'], outputs: ['mm3'] },
        { op: 'Clip', inputs: ['mm3', 'zero', 'six'], outputs: ['relu6'] },
        // layer 4 + Clip(-1, 6): not a ReLU, so the layer itself is default
        { op: 'MatMul', inputs: ['relu6', 'W4'], outputs: ['mm4'] },
        { op: 'Clip', inputs: ['mm4', 'minus1', 'six'], outputs: ['out'] },
      ],
    });
    expect(defaults(info)).toEqual(['silu1', 'gelu2', 'relu6', 'mm4']);
    expect(info.tensors.map((t) => t.name)).toEqual([
      'mm1', 'pre1', 'gate1', 'silu1', 'mm2', 'pre2', 'g_div', 'g_erf', 'g_add', 'g_mul', 'gelu2', 'mm3', 'relu6', 'mm4', 'out',
    ]);
    // Broadcast of [b, 4] with [4] → [b, 4]; scalars keep the shape (ONNX Broadcasting document).
    expect(info.tensors.find((t) => t.name === 'gelu2')?.dims).toEqual(['b', 4]);
  });

  it('a layer not followed by an activation is default at the end of its bias chain', () => {
    const { info } = read({
      name: 'bias_chain',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, 2] }],
      outputs: [{ name: 'sum', elemType: 'float32', dims: [1, 2] }],
      initializers: [{ name: 'W', dims: [2, 2], data: f32(1, 0, 0, 1) }, { name: 'b', dims: [2], data: f32(1, 1) }],
      nodes: [
        { op: 'MatMul', inputs: ['x', 'W'], outputs: ['mm'] },
        { op: 'Add', inputs: ['mm', 'b'], outputs: ['biased'] },
        { op: 'Add', inputs: ['biased', 'x'], outputs: ['sum'] }, // a residual, not a bias: the chain stops
      ],
    });
    expect(defaults(info)).toEqual(['biased']);
  });

  it('leaves out constant folding and shape arithmetic, keeps what depends on the input', () => {
    const { info } = read({
      name: 'shapes',
      inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 2, 3] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: ['batch', 6] }, { name: 'z', elemType: 'float32', dims: ['batch', 6] }],
      initializers: [
        { name: 'idx0', dims: [1], data: i64(0) }, { name: 'axes0', dims: [1], data: i64(0) },
        { name: 'minus1', dims: [1], data: i64(-1) }, { name: 'flat_shape', dims: [2], data: i64(0, -1) },
        { name: 'ca', dims: [6], data: f32(1, 2, 3, 4, 5, 6) }, { name: 'cb', dims: [6], data: f32(1, 1, 1, 1, 1, 1) },
        { name: 'two', dims: [], data: f32(2) },
      ],
      nodes: [
        // shape arithmetic: Shape → Gather → Concat → Reshape's shape input
        { op: 'Shape', inputs: ['x'], outputs: ['s'] },
        { op: 'Gather', inputs: ['s', 'idx0'], outputs: ['batch_dim'], attributes: { axis: { i: 0 } } },
        { op: 'Concat', inputs: ['batch_dim', 'minus1'], outputs: ['new_shape'], attributes: { axis: { i: 0 } } },
        { op: 'Reshape', inputs: ['x', 'new_shape'], outputs: ['reshaped'] },
        // float shape arithmetic: Cast(Shape) / 2
        { op: 'Cast', inputs: ['s'], outputs: ['s_float'], attributes: { to: { i: 1 } } },
        { op: 'Div', inputs: ['s_float', 'two'], outputs: ['s_half'] },
        { op: 'ConstantOfShape', inputs: ['s'], outputs: ['filled'], attributes: { value: { tensor: { name: 'v', dims: [1], data: f32(0.5) } } } },
        // constant folding: Constant, Add of two initializers
        { op: 'Constant', inputs: [], outputs: ['k'], attributes: { value: { tensor: { name: 'kv', dims: [6], data: f32(1, 2, 3, 4, 5, 6) } } } },
        { op: 'Add', inputs: ['ca', 'cb'], outputs: ['folded'] },
        { op: 'Mul', inputs: ['folded', 'k'], outputs: ['folded2'] },
        // input-dependent: uses the folded constant, but reads x
        { op: 'Add', inputs: ['reshaped', 'folded2'], outputs: ['y'] },
        { op: 'Reshape', inputs: ['x', 'flat_shape'], outputs: ['r2'] },
        { op: 'Relu', inputs: ['r2'], outputs: ['z'] },
        { op: 'Unsqueeze', inputs: ['batch_dim', 'axes0'], outputs: ['unused'] },
      ],
    });
    expect(info.tensors.map((t) => t.name)).toEqual(['reshaped', 'y', 'r2', 'z']);
    // Reshape's shape comes from the graph here, so it is unknown statically; Add broadcasts it with [6].
    expect(info.tensors[0].dims).toBeNull();
    // Reshape [batch, 2, 3] to [0, −1]: 0 copies batch, −1 takes 2·3 = 6 (ONNX operator specification: Reshape).
    expect(info.tensors.find((t) => t.name === 'r2')?.dims).toEqual(['batch', 6]);
    expect(defaults(info)).toEqual(['z']);
  });

  it('lists tensors inside If branches as not capturable, with the reason, and refuses to expose them', async () => {
    const spec: GraphSpec = {
      name: 'branchy',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, 3] }, { name: 'flag', elemType: 'bool', dims: [] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: [1, 3] }],
      initializers: [{ name: 'W', dims: [3, 3], data: f32(1, 0, 0, 0, 2, 0, 0, 0, 3) }],
      nodes: [
        { op: 'MatMul', name: 'proj', inputs: ['x', 'W'], outputs: ['h'] },
        {
          op: 'If', name: 'branch', inputs: ['flag'], outputs: ['y'],
          attributes: {
            then_branch: { graph: {
              name: 'then', inputs: [], outputs: [{ name: 'then_out', elemType: 'float32', dims: [1, 3] }],
              initializers: [{ name: 'two', dims: [], data: f32(2) }],
              nodes: [
                { op: 'Relu', name: 'then_relu', inputs: ['h'], outputs: ['then_act'] },
                { op: 'Mul', name: 'then_scale', inputs: ['then_act', 'two'], outputs: ['then_out'] },
              ],
            } },
            else_branch: { graph: {
              name: 'else', inputs: [], outputs: [{ name: 'else_out', elemType: 'float32', dims: [1, 3] }],
              initializers: [],
              nodes: [{ op: 'Tanh', name: 'else_tanh', inputs: ['h'], outputs: ['else_out'] }],
            } },
          },
        },
      ],
    };
    const { info, bytes, path } = read(spec);
    expect(info.tensors.map((t) => [t.name, t.op, t.capturable, t.reason ?? null])).toEqual([
      ['h', 'MatMul', true, null],
      ['then_act', 'Relu', false, SUBGRAPH_REASON],
      ['then_out', 'Mul', false, SUBGRAPH_REASON],
      ['else_out', 'Tanh', false, SUBGRAPH_REASON],
      ['y', 'If', true, null],
    ]);
    expect(SUBGRAPH_REASON).toBe('inside a control-flow subgraph (If/Loop/Scan); Skein can only capture top-level tensors');
    // h is read by both branches of the If, so no single activation follows it: the layer is default.
    expect(defaults(info)).toEqual(['h']);
    expect(() => exposeTensors(bytes, ['then_act'], { modelPath: path })).toThrow(/control-flow subgraph/);

    // The top-level tensors still come back from onnxruntime: x·diag(1,2,3), then Relu·2 on the true branch.
    const session = await createSession(exposeTensors(bytes, ['h'], { modelPath: path }));
    const out = await session.run({
      x: new ort.Tensor('float32', f32(1, -1, 2), [1, 3]),
      flag: new ort.Tensor('bool', new Uint8Array([1]), []),
    });
    expect(Array.from(out.h.data as Float32Array)).toEqual([1, -2, 6]);
    expect(Array.from(out.y.data as Float32Array)).toEqual([2, 0, 12]);
    await session.release();
  });

  it('exposeTensors keeps original outputs, adds the named ones once, and names an unknown tensor', () => {
    const { bytes } = read(mlpSpec(mlpWeights(4)));
    const rewritten = exposeTensors(bytes, ['act1_out', 'act1_out', 'logits']);
    const path = join(tempDir(), 'rewritten.onnx');
    writeFileSync(path, rewritten);
    expect(readModel(path).outputs.map((o) => [o.name, o.elemType, o.dims])).toEqual([
      ['logits', 'float32', ['batch', 3]],
      ['act1_out', 'float32', null],
    ]);
    let error: unknown;
    try {
      exposeTensors(bytes, ['act1_out', 'no_such_tensor']);
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(SkeinError);
    expect((error as SkeinError).code).toBe('model');
    expect((error as SkeinError).message).toContain('"no_such_tensor"');
    expect((error as SkeinError).where).toBe('tensor no_such_tensor');
  });
});

// Layout conventions (common practice, no source): NCHW conv maps, [T, H] sequences, [H] dense.
describe('unitLayout and batchPolicy', () => {
  it('reads per-sample dims by rank', () => {
    expect(unitLayout([128])).toEqual({ kind: 'dense', units: 128 });
    expect(unitLayout([16, 8, 8])).toEqual({ kind: 'conv', units: 16, spatial: [8, 8] });
    expect(unitLayout([10, 32])).toEqual({ kind: 'sequence', units: 32, steps: 10 });
    const flat = unitLayout([2, 3, 4, 5]);
    expect(flat.kind).toBe('flat');
    expect(flat.units).toBe(120);
    expect(flat.warning).toMatch(/4 axes/);
    expect(unitLayout([]).units).toBe(1);
    expect(() => unitLayout([0, 4])).toThrow(SkeinError);
  });

  it('a numeric first input dim is a fixed batch, a symbolic or unknown one is dynamic', () => {
    expect(batchPolicy({ name: 'x', elemType: 'float32', dims: [1, 3, 32, 32] })).toEqual({ fixed: 1 });
    expect(batchPolicy({ name: 'x', elemType: 'float32', dims: ['batch', 3] })).toEqual({ fixed: null });
    expect(batchPolicy({ name: 'x', elemType: 'float32', dims: [null, 3] })).toEqual({ fixed: null });
    expect(batchPolicy({ name: 'x', elemType: 'float32', dims: null })).toEqual({ fixed: null });
  });
});
