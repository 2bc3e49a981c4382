/**
 * Graph surgery for ablations on the model shapes capture supports (fixed batch, opsets 9 to 21, Conv, Gemm,
 * MatMul, a shape-computed Reshape): the downstream model fed the untouched tensor reproduces the model, and an
 * ablation (the unit's slice of the fed tensor replaced, core/intervene/surgery.ts unitSlice) matches an independent forward pass (plain TypeScript loops from the ONNX operator specification, and
 * NumPy via Debian's /usr/bin/python3 for mean ablation).
 */
import { execFileSync } from 'node:child_process';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { buildModel } from '../../core/model/writer.ts';
import { onnx } from '../../core/model/proto.ts';
import { cutAt, unitSlice, type CutModel } from '../../core/intervene/surgery.ts';
import { CNN, cnnSpec, cnnWeights, conv2d, gemmTransB, maxPool2d, MLP, mlpSpec, mlpWeights, randomArray, relu, seededRandom, tanh } from '../model/fixtures.ts';

type Kind = 'dense' | 'conv' | 'sequence' | 'flat';

/**
 * Runs upstream, replaces units of the target in the fed tensor (unit → value, at unitSlice's positions), runs
 * downstream; returns the first output.
 */
async function runCut(cut: CutModel, feeds: Record<string, ort.Tensor>, kind: Kind, dims: number[], replace: Record<number, number>): Promise<Float32Array> {
  const up = await ort.InferenceSession.create(cut.upstream);
  const down = await ort.InferenceSession.create(cut.downstream);
  try {
    const cached = cut.frontier.filter((f) => f.source === 'cached').map((f) => f.name);
    const outs = await up.run(feeds, cached);
    const t = outs[cut.target];
    const data = t.data as Float32Array;
    const per = t.size / t.dims[0];
    for (const [u, value] of Object.entries(replace)) {
      const s = unitSlice(kind, dims, Number(u));
      for (let p = 0; p < t.dims[0]; p++) for (let j = 0; j < s.count; j++) data[p * per + s.start + j * s.step] = value;
    }
    const dfeeds: Record<string, ort.Tensor> = {};
    for (const f of cut.frontier) dfeeds[f.name] = f.source === 'cached' ? outs[f.name] : feeds[f.name];
    const r = await down.run(dfeeds);
    return r[cut.outputs[0]].data as Float32Array;
  } finally {
    await up.release();
    await down.release();
  }
}

function expectClose(got: ArrayLike<number>, want: ArrayLike<number>, tol: number): void {
  expect(got.length).toBe(want.length);
  let worst = 0;
  for (let i = 0; i < got.length; i++) worst = Math.max(worst, Math.abs(got[i] - want[i]));
  expect(worst).toBeLessThan(tol);
}

/** MLP forward (Gemm → Relu → Gemm → Tanh → Gemm) with the Relu output's column `unit` replaced by `value`. */
function mlpAblated(w: ReturnType<typeof mlpWeights>, x: Float32Array, n: number, unit: number, value: number | null): Float64Array {
  const act1 = relu(gemmTransB(x, n, MLP.inputs, w.w1, w.b1, MLP.hidden1));
  if (value !== null) for (let i = 0; i < n; i++) act1[i * MLP.hidden1 + unit] = value;
  const act2 = tanh(gemmTransB(Float32Array.from(act1), n, MLP.hidden1, w.w2, w.b2, MLP.hidden2));
  return gemmTransB(Float32Array.from(act2), n, MLP.hidden2, w.w3, w.b3, MLP.outputs);
}

describe('cutting a model at a tensor', () => {
  it('MLP, opset 9, fixed batch 2: identity edit reproduces the model; zero ablation matches the loop forward pass', async () => {
    const w = mlpWeights(3);
    const bytes = buildModel({ ...mlpSpec(w, 2), opset: 9 });
    const cut = cutAt(bytes, 'act1_out');
    expect(cut.frontier.map((f) => f.name)).toEqual(['act1_out']);
    expect(cut.downstreamNodes).toBe(3); // fc2, act2, fc3: one ablation reruns the part after the cut only
    expect(onnx.ModelProto.decode(cut.downstream).graph!.input!.map((i) => i.name)).toEqual(['act1_out']);
    const x = randomArray(seededRandom(5), 2 * MLP.inputs, 2);
    const feeds = { x: new ort.Tensor('float32', x, [2, MLP.inputs]) };
    expectClose(await runCut(cut, feeds, 'dense', [MLP.hidden1], {}), mlpAblated(w, x, 2, 0, null), 1e-5);
    expectClose(await runCut(cut, feeds, 'dense', [MLP.hidden1], { 3: 0 }), mlpAblated(w, x, 2, 3, 0), 1e-5);
  });

  it('mean ablation equals an independent NumPy forward pass of the same weights (Debian python3-numpy)', async () => {
    const w = mlpWeights(11);
    const n = 64;
    const x = randomArray(seededRandom(12), n * MLP.inputs, 2);
    const unit = 2;
    const cut = cutAt(buildModel(mlpSpec(w)), 'act1_out');
    // The unit's mean over the probes, from onnxruntime's own upstream pass.
    const up = await ort.InferenceSession.create(cut.upstream);
    const h = (await up.run({ x: new ort.Tensor('float32', x, [n, MLP.inputs]) }, ['act1_out'])).act1_out.data as Float32Array;
    await up.release();
    let mean = 0;
    for (let i = 0; i < n; i++) mean += h[i * MLP.hidden1 + unit] / n;
    const got = await runCut(cut, { x: new ort.Tensor('float32', x, [n, MLP.inputs]) }, 'dense', [MLP.hidden1], { [unit]: mean });
    const script = `
import json, sys, numpy as np
d = json.load(sys.stdin)
f = lambda k, *s: np.array(d[k], dtype=np.float32).reshape(*s)
x = f('x', ${n}, ${MLP.inputs})
h = np.maximum(0, x @ f('w1', ${MLP.hidden1}, ${MLP.inputs}).T + f('b1', ${MLP.hidden1}))
h[:, ${unit}] = h[:, ${unit}].mean()
t = np.tanh(h @ f('w2', ${MLP.hidden2}, ${MLP.hidden1}).T + f('b2', ${MLP.hidden2}))
print(json.dumps((t @ f('w3', ${MLP.outputs}, ${MLP.hidden2}).T + f('b3', ${MLP.outputs})).astype(float).ravel().tolist()))
`;
    const input = JSON.stringify({ x: [...x], w1: [...w.w1], b1: [...w.b1], w2: [...w.w2], b2: [...w.b2], w3: [...w.w3], b3: [...w.b3] });
    const want = JSON.parse(execFileSync('/usr/bin/python3', ['-c', script], { input }).toString()) as number[];
    expectClose(got, want, 1e-5);
  });

  it('CNN, opset 21: a conv channel is replaced over its whole map', async () => {
    const w = cnnWeights(4);
    const n = 3;
    const cut = cutAt(buildModel({ ...cnnSpec(w), opset: 21 }), 'relu_out');
    const x = randomArray(seededRandom(6), n * CNN.channels * CNN.size * CNN.size);
    expect(unitSlice('conv', [CNN.filters, CNN.size, CNN.size], 1)).toEqual({ start: CNN.size * CNN.size, step: 1, count: CNN.size * CNN.size });
    const got = await runCut(cut, { image: new ort.Tensor('float32', x, [n, CNN.channels, CNN.size, CNN.size]) }, 'conv', [CNN.filters, CNN.size, CNN.size], { 1: 0.25 });
    // Reference: Conv → Relu, channel 1 set to 0.25 everywhere, → MaxPool → Gemm.
    const conv = conv2d(x, n, CNN.channels, CNN.size, CNN.size, w.conv, w.convBias, CNN.filters, CNN.kernel, CNN.kernel, 1);
    const act = relu(conv.data);
    const area = conv.h * conv.w;
    for (let i = 0; i < n; i++) act.fill(0.25, (i * CNN.filters + 1) * area, (i * CNN.filters + 2) * area);
    const pool = maxPool2d(act, n, CNN.filters, conv.h, conv.w, 2);
    const flat = (CNN.filters * CNN.size * CNN.size) / 4;
    expectClose(got, gemmTransB(Float32Array.from(pool.data), n, flat, w.fc, w.fcBias, CNN.classes), 1e-5);
  });

  it('MatMul + Add sequence layer, opset 13, flattened by a Shape → Gather → Concat → Reshape chain: every position is replaced, the shape chain moves downstream', async () => {
    const T = 3, D = 2, H = 4, O = 2, n = 5;
    const r = seededRandom(8);
    const wIn = randomArray(r, D * H), bIn = randomArray(r, H), wOut = randomArray(r, T * H * O);
    const bytes = buildModel({
      name: 'seq', opset: 13,
      inputs: [{ name: 'x', elemType: 'float32', dims: ['N', T, D] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: ['N', O] }],
      initializers: [
        { name: 'Win', dims: [D, H], data: wIn }, { name: 'bin', dims: [H], data: bIn }, { name: 'Wout', dims: [T * H, O], data: wOut },
        { name: 'zero', dims: [1], data: new BigInt64Array([0n]) }, { name: 'minus1', dims: [1], data: new BigInt64Array([-1n]) },
      ],
      nodes: [
        { op: 'MatMul', inputs: ['x', 'Win'], outputs: ['mm'] },
        { op: 'Add', inputs: ['mm', 'bin'], outputs: ['pre'] },
        { op: 'Relu', inputs: ['pre'], outputs: ['seq'] },
        { op: 'Shape', inputs: ['seq'], outputs: ['shape'] },
        { op: 'Gather', inputs: ['shape', 'zero'], outputs: ['batch'] },
        { op: 'Concat', inputs: ['batch', 'minus1'], outputs: ['target'], attributes: { axis: { i: 0 } } },
        { op: 'Reshape', inputs: ['seq', 'target'], outputs: ['flat'] },
        { op: 'MatMul', inputs: ['flat', 'Wout'], outputs: ['y'] },
      ],
    });
    const cut = cutAt(bytes, 'seq');
    expect(cut.frontier.map((f) => f.name)).toEqual(['seq']); // Shape/Gather/Concat rerun downstream, not cached
    const x = randomArray(seededRandom(9), n * T * D);
    const got = await runCut(cut, { x: new ort.Tensor('float32', x, [n, T, D]) }, 'sequence', [T, H], { 2: 0 });
    const want = new Float64Array(n * O);
    for (let i = 0; i < n; i++) {
      const flat = new Float64Array(T * H);
      for (let t = 0; t < T; t++) for (let h = 0; h < H; h++) {
        let s = bIn[h];
        for (let d = 0; d < D; d++) s += x[(i * T + t) * D + d] * wIn[d * H + h];
        flat[t * H + h] = h === 2 ? 0 : Math.max(0, s);
      }
      for (let o = 0; o < O; o++) { let s = 0; for (let k = 0; k < T * H; k++) s += flat[k] * wOut[k * O + o]; want[i * O + o] = s; }
    }
    expectClose(got, want, 1e-5);
  });

  it('names the tensor and what to do for tensors it cannot cut at', () => {
    const bytes = buildModel(mlpSpec(mlpWeights(1)));
    expect(() => cutAt(bytes, 'nope')).toThrow(/no top-level tensor named "nope"/);
    expect(() => cutAt(bytes, 'logits')).toThrow(/itself a model output/);
  });
});
