import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { createSession, dryRunShapes, exposeTensors, readModel } from '../../core/model/index.ts';
import { buildModel, type GraphSpec } from '../../core/model/writer.ts';
import {
  batchNorm, cnnForward, cnnSpec, cnnWeights, conv2d, matmulAdd, mlpForward, mlpSpec, mlpWeights,
  randomArray, relu, seededRandom, tempDir, CNN, MLP,
} from './fixtures.ts';

function expectClose(actual: ort.Tensor, expected: ArrayLike<number>, tolerance = 1e-5): void {
  const got = actual.data as Float32Array;
  expect(got.length).toBe(expected.length);
  let worst = 0;
  for (let k = 0; k < got.length; k++) worst = Math.max(worst, Math.abs(got[k] - expected[k]));
  expect(worst).toBeLessThan(tolerance);
}

async function runExposed(spec: GraphSpec, feeds: Record<string, ort.Tensor>) {
  const dir = tempDir();
  const path = join(dir, `${spec.name}.onnx`);
  const bytes = buildModel(spec);
  writeFileSync(path, bytes);
  const info = readModel(path);
  const names = info.tensors.filter((t) => t.capturable).map((t) => t.name);
  const session = await createSession(exposeTensors(bytes, names, { modelPath: path }), { intraOpThreads: 1 });
  const results = await session.run(feeds);
  return { info, session, results, names };
}

// Element-wise checks against a plain-TS forward pass; semantics per the ONNX operator specification:
// Gemm, Conv, MaxPool, Flatten, BatchNormalization, MatMul, Relu, Tanh.
describe('exposed tensors equal an independent forward pass', () => {
  it('MLP Gemm → Relu → Gemm → Tanh → Gemm', async () => {
    const weights = mlpWeights(11);
    const n = 7;
    const x = randomArray(seededRandom(12), n * MLP.inputs, 2);
    const { results, names, session } = await runExposed(mlpSpec(weights), { x: new ort.Tensor('float32', x, [n, MLP.inputs]) });
    expect(names).toEqual(['fc1_out', 'act1_out', 'fc2_out', 'act2_out', 'logits']);
    const expected = mlpForward(weights, x, n);
    for (const name of names) expectClose(results[name], expected[name]);
    expect(results.fc1_out.dims).toEqual([n, MLP.hidden1]);
    // Relu zeroes some units for these seeds, so the pre- and post-activation tensors really differ.
    expect(Array.from(expected.fc1_out).some((v) => v < 0)).toBe(true);
    await session.release();
  });

  it('CNN Conv 3×3 pad 1 → Relu → MaxPool 2×2 → Flatten → Gemm', async () => {
    const weights = cnnWeights(21);
    const n = 3;
    const x = randomArray(seededRandom(22), n * CNN.channels * CNN.size * CNN.size);
    const { results, names, session } = await runExposed(cnnSpec(weights), {
      image: new ort.Tensor('float32', x, [n, CNN.channels, CNN.size, CNN.size]),
    });
    expect(names).toEqual(['conv_out', 'relu_out', 'pool_out', 'flat_out', 'scores']);
    const expected = cnnForward(weights, x, n);
    for (const name of names) expectClose(results[name], expected[name]);
    expect(results.conv_out.dims).toEqual([n, CNN.filters, CNN.size, CNN.size]);
    expect(results.pool_out.dims).toEqual([n, CNN.filters, 3, 3]);
    await session.release();
  });

  it('keeps tensors that optimization level "all" would otherwise fuse (Conv+BN+Relu, MatMul+Add+Relu)', async () => {
    const r = seededRandom(31);
    const [c, m, hw] = [2, 3, 4];
    const k = randomArray(r, m * c * 9), kb = randomArray(r, m, 0.2);
    const scale = randomArray(r, m), bias = randomArray(r, m, 0.2), mean = randomArray(r, m, 0.2);
    const variance = Float32Array.from(randomArray(r, m), (v) => Math.abs(v) + 0.5);
    const flat = m * hw * hw, hidden = 5;
    const w = randomArray(r, flat * hidden, 0.3), wb = randomArray(r, hidden, 0.2);
    const spec: GraphSpec = {
      name: 'fusable',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, c, hw, hw] }],
      outputs: [{ name: 'out', elemType: 'float32', dims: [1, hidden] }],
      initializers: [
        { name: 'k', dims: [m, c, 3, 3], data: k }, { name: 'kb', dims: [m], data: kb },
        { name: 'scale', dims: [m], data: scale }, { name: 'bias', dims: [m], data: bias },
        { name: 'mean', dims: [m], data: mean }, { name: 'var', dims: [m], data: variance },
        { name: 'w', dims: [flat, hidden], data: w }, { name: 'wb', dims: [hidden], data: wb },
      ],
      nodes: [
        { op: 'Conv', inputs: ['x', 'k', 'kb'], outputs: ['conv'], attributes: { pads: { ints: [1, 1, 1, 1] } } },
        { op: 'BatchNormalization', inputs: ['conv', 'scale', 'bias', 'mean', 'var'], outputs: ['bn'], attributes: { epsilon: { f: 1e-5 } } },
        { op: 'Relu', inputs: ['bn'], outputs: ['bn_relu'] },
        { op: 'Flatten', inputs: ['bn_relu'], outputs: ['flat'] },
        { op: 'MatMul', inputs: ['flat', 'w'], outputs: ['mm'] },
        { op: 'Add', inputs: ['mm', 'wb'], outputs: ['mm_bias'] },
        { op: 'Relu', inputs: ['mm_bias'], outputs: ['out'] },
      ],
    };
    const x = randomArray(seededRandom(32), c * hw * hw);
    const { results, session } = await runExposed(spec, { x: new ort.Tensor('float32', x, [1, c, hw, hw]) });
    const conv = conv2d(x, 1, c, hw, hw, k, kb, m, 3, 3, 1).data;
    const bn = batchNorm(conv, 1, m, hw * hw, scale, bias, mean, variance, 1e-5);
    const act = relu(bn);
    const mm = matmulAdd(act, 1, flat, w, new Float32Array(hidden), hidden);
    const mmBias = mm.map((v, j) => v + wb[j]);
    expectClose(results.conv, conv);
    expectClose(results.bn, bn);
    expectClose(results.bn_relu, act);
    expectClose(results.mm, mm);
    expectClose(results.mm_bias, mmBias);
    expectClose(results.out, relu(mmBias));
    await session.release();
  });
});

describe('dryRunShapes', () => {
  it('reports concrete shapes of the symbolic-batch CNN after one run', async () => {
    const weights = cnnWeights(5);
    const n = 2;
    const x = randomArray(seededRandom(6), n * CNN.channels * CNN.size * CNN.size);
    const { info, session } = await runExposed(cnnSpec(weights), {
      image: new ort.Tensor('float32', x, [n, CNN.channels, CNN.size, CNN.size]),
    });
    // Inferred statically, symbolic batch kept (Conv / MaxPool output-size formulas, ONNX operator specification).
    expect(info.tensors.find((t) => t.name === 'pool_out')?.dims).toEqual(['N', 3, 3, 3]);
    const shapes = await dryRunShapes(info, session, { image: new ort.Tensor('float32', x, [n, CNN.channels, CNN.size, CNN.size]) });
    expect(shapes).toEqual({
      scores: [2, 4], conv_out: [2, 3, 6, 6], relu_out: [2, 3, 6, 6], pool_out: [2, 3, 3, 3], flat_out: [2, 27],
    });
    await session.release();
  });
});

describe('float16 tensors', () => {
  it('are listed as capturable and come back from onnxruntime (as IEEE half-precision bits)', async () => {
    const spec: GraphSpec = {
      name: 'half',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1, 4] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: [1, 4] }],
      initializers: [],
      nodes: [
        { op: 'Cast', inputs: ['x'], outputs: ['x16'], attributes: { to: { i: 10 } } }, // 10 = FLOAT16 (onnx.proto DataType)
        { op: 'Relu', inputs: ['x16'], outputs: ['r16'] },
        { op: 'Cast', inputs: ['r16'], outputs: ['y'], attributes: { to: { i: 1 } } },
      ],
    };
    const { info, results, session } = await runExposed(spec, { x: new ort.Tensor('float32', new Float32Array([-2, 0.5, 1, 3]), [1, 4]) });
    expect(info.tensors.map((t) => [t.name, t.elemType, t.capturable, t.isDefault])).toEqual([
      ['x16', 'float16', true, false],
      ['r16', 'float16', true, true],
      ['y', 'float32', true, false],
    ]);
    expect(results.r16.type).toBe('float16');
    // IEEE 754 binary16: 0 → 0x0000, 0.5 → 0x3800, 1 → 0x3C00, 3 → 0x4200.
    expect(Array.from(results.r16.data as Uint16Array)).toEqual([0x0000, 0x3800, 0x3c00, 0x4200]);
    await session.release();
  });
});

describe("plainOrtMessage: onnxruntime's load errors without source paths or C++ signatures", () => {
  it('drops the error-code prefix, the path:line and the signature, and names the node', async () => {
    const { plainOrtMessage } = await import('../../core/model/session.ts');
    // The shape of onnxruntime's messages: "[ONNXRuntimeError] : code : NAME : path:line signature reason" (seen with onnxruntime-node 1.30).
    const raw = '[ONNXRuntimeError] : 1 : FAIL : /onnxruntime_src/onnxruntime/core/graph/graph.cc:1542 void onnxruntime::Graph::InitializeStateFromModelFileGraphProto(std::function<void (int)>, const std::vector<int>&) const This is an invalid model. Node (act) Op (Relu) has 3 inputs.\n';
    expect(plainOrtMessage(raw)).toEqual({
      where: 'node act',
      message: "onnxruntime could not load the model: This is an invalid model. Node (act) Op (Relu) has 3 inputs. Check that the model opens in onnxruntime on CPU, or re-export it (skein --verbose shows onnxruntime's own message).",
    });
    // A message with no source path passes through whole.
    expect(plainOrtMessage('Node (mm) Op (MatMul) [ShapeInferenceError] Incompatible dimensions for matrix multiplication').message)
      .toBe("onnxruntime could not load the model: Node (mm) Op (MatMul) [ShapeInferenceError] Incompatible dimensions for matrix multiplication. Check that the model opens in onnxruntime on CPU, or re-export it (skein --verbose shows onnxruntime's own message).");
  });
});
