/**
 * Pooling inside the graph (core/model/pool-graph.ts) must give exactly what the JavaScript pooling of the exposed
 * tensor gives (core/extract/pool.ts, what every study before it stored): the same float32 bits and the same
 * locations, for every layer kind and pool mode. Both sides run in the same onnxruntime on the same probes.
 * Pooling semantics themselves (max and its first location, mean, last step) are pinned against a direct
 * computation from the ONNX operator specification's definitions of ReduceMax, ArgMax and ReduceMean.
 */
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { createSession, exposeTensors, unitLayout } from '../../core/model/index.ts';
import { exposePooled, canPoolInGraph, type GraphPool } from '../../core/model/pool-graph.ts';
import { buildModel, type GraphSpec } from '../../core/model/writer.ts';
import { poolBatch } from '../../core/extract/pool.ts';
import { randomArray, seededRandom } from './fixtures.ts';

/** x[B,1,8,8] → Conv(6, 3×3, pad 1) → Relu (r1) → Conv(4, 3×3) (c2, pre-activation: negative values, ties rare). */
function convSpec(opset: number): GraphSpec {
  const rand = seededRandom(31);
  return {
    name: 'conv', opset,
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 1, 8, 8] }],
    outputs: [{ name: 'c2', elemType: 'float32', dims: ['batch', 4, 6, 6] }],
    initializers: [
      { name: 'K1', dims: [6, 1, 3, 3], data: randomArray(rand, 54, 0.6) }, { name: 'k1', dims: [6], data: randomArray(rand, 6, 0.1) },
      { name: 'K2', dims: [4, 6, 3, 3], data: randomArray(rand, 216, 0.3) }, { name: 'k2', dims: [4], data: randomArray(rand, 4, 0.1) },
    ],
    nodes: [
      { op: 'Conv', name: 'conv1', inputs: ['x', 'K1', 'k1'], outputs: ['c1'], attributes: { kernel_shape: { ints: [3, 3] }, pads: { ints: [1, 1, 1, 1] } } },
      { op: 'Relu', name: 'relu1', inputs: ['c1'], outputs: ['r1'] },
      { op: 'Conv', name: 'conv2', inputs: ['r1', 'K2', 'k2'], outputs: ['c2'], attributes: { kernel_shape: { ints: [3, 3] } } },
    ],
  };
}

/** x[B,5,3] → MatMul W[3,7] → Relu (h, a sequence of 5 steps × 7 units) → ReduceMean-free head. */
function sequenceSpec(opset: number): GraphSpec {
  const rand = seededRandom(41);
  return {
    name: 'seq', opset,
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 5, 3] }],
    outputs: [{ name: 'h', elemType: 'float32', dims: ['batch', 5, 7] }],
    initializers: [{ name: 'W', dims: [3, 7], data: randomArray(rand, 21, 1) }],
    nodes: [
      { op: 'MatMul', name: 'mm', inputs: ['x', 'W'], outputs: ['m'] },
      { op: 'Relu', name: 'relu', inputs: ['m'], outputs: ['h'] },
    ],
  };
}

/** x[B,4] → Gemm(5) → Relu → Reshape [B,1,1,5] (h4: rank 5 with batch, a "flat" layer). */
function denseSpec(opset: number): GraphSpec {
  const rand = seededRandom(51);
  return {
    name: 'dense', opset,
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 4] }],
    outputs: [{ name: 'h4', elemType: 'float32', dims: ['batch', 1, 1, 1, 5] }],
    initializers: [
      { name: 'W', dims: [4, 5], data: randomArray(rand, 20, 1) }, { name: 'b', dims: [5], data: randomArray(rand, 5, 0.2) },
      { name: 'shape', dims: [5], data: BigInt64Array.from([0n, 1n, 1n, 1n, 5n]) },
    ],
    nodes: [
      { op: 'Gemm', name: 'fc', inputs: ['x', 'W', 'b'], outputs: ['pre'] },
      { op: 'Relu', name: 'relu', inputs: ['pre'], outputs: ['h'] },
      { op: 'Reshape', name: 'reshape', inputs: ['h', 'shape'], outputs: ['h4'] },
    ],
  };
}

/** Runs the exposed model and the pooled one on the same feeds; returns both poolings of `name` per pool mode. */
async function compare(spec: GraphSpec, input: Float32Array, shape: number[], name: string, pool: GraphPool) {
  const bytes = buildModel(spec);
  const plain = await createSession(exposeTensors(bytes, [name]), { intraOpThreads: 1 });
  const x = new ort.Tensor('float32', input, shape);
  const full = (await plain.run({ x }, [name]))[name];
  await plain.release();
  const dims = full.dims.slice(1).map(Number);
  const layout = unitLayout(dims);
  const expected = poolBatch(full.data as Float32Array, shape[0], layout.kind, dims, pool);
  const pooled = exposePooled(bytes, [{ name, kind: layout.kind, dims, pool }]);
  const session = await createSession(pooled.bytes, { intraOpThreads: 1 });
  const o = pooled.outputs.get(name)!;
  const out = await session.run({ x }, o.argmax ? [o.values, o.argmax] : [o.values]);
  await session.release();
  const values = out[o.values].data as Float32Array;
  const argmax = o.argmax ? Uint32Array.from(out[o.argmax].data as Int32Array) : o.constantArgmax !== null ? new Uint32Array(values.length).fill(o.constantArgmax) : null;
  return { full, dims, expected, values, argmax, units: layout.units };
}

/** Same float32 bits (so -0 and +0 differ, and NaN payloads count). */
function bits(a: Float32Array): Uint32Array {
  return new Uint32Array(a.buffer, a.byteOffset, a.length);
}

describe('pooling inside the graph equals the JavaScript pooling of the exposed tensor', () => {
  const batch = 9;
  for (const opset of [13, 17, 18]) {
    for (const pool of ['max', 'mean'] as const) {
      for (const tensor of ['r1', 'c2']) {
        it(`conv ${tensor}, ${pool}, opset ${opset}`, async () => {
          const input = randomArray(seededRandom(7 + opset), batch * 64, 2);
          const r = await compare(convSpec(opset), input, [batch, 1, 8, 8], tensor, pool);
          expect(r.values.length).toBe(r.units * batch);
          expect(bits(r.values)).toEqual(bits(r.expected.values));
          expect(r.argmax).toEqual(r.expected.argmax);
        });
      }
    }
    for (const pool of ['max', 'mean', 'last'] as const) {
      it(`sequence, ${pool}, opset ${opset}`, async () => {
        const input = randomArray(seededRandom(3 + opset), batch * 15, 1);
        const r = await compare(sequenceSpec(opset), input, [batch, 5, 3], 'h', pool);
        expect(bits(r.values)).toEqual(bits(r.expected.values));
        expect(r.argmax).toEqual(r.expected.argmax);
      });
    }
    it(`dense and flat layers come back unit-major, unchanged, opset ${opset}`, async () => {
      const input = randomArray(seededRandom(5), batch * 4, 1);
      for (const name of ['h', 'h4']) {
        const r = await compare(denseSpec(opset), input, [batch, 4], name, 'max');
        expect(r.argmax).toBeNull();
        expect(bits(r.values)).toEqual(bits(r.expected.values));
      }
    });
  }

  it('the pooled values are the ONNX definitions: max with its first location, mean over the map, the last step', async () => {
    // A map with a tie for the maximum (ArgMax, select_last_index = 0: "the index of the first occurrence").
    const spec: GraphSpec = {
      name: 'id', opset: 17,
      inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 2, 2, 2] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: ['batch', 2, 2, 2] }],
      initializers: [], nodes: [{ op: 'Relu', name: 'relu', inputs: ['x'], outputs: ['y'] }],
    };
    const x = Float32Array.from([1, 3, 3, -2, /* channel 1 */ -1, -4, 0.5, 0.25]);
    const max = await compare(spec, x, [1, 2, 2, 2], 'y', 'max');
    expect(Array.from(max.values)).toEqual([3, 0.5]);
    expect(Array.from(max.argmax!)).toEqual([1, 2]);
    const mean = await compare(spec, x, [1, 2, 2, 2], 'y', 'mean');
    expect(Array.from(mean.values)).toEqual([Math.fround(7 / 4), Math.fround(0.75 / 4)]);
    const seq = await compare(sequenceSpec(17), Float32Array.from({ length: 15 }, (_, k) => k - 7), [1, 5, 3], 'h', 'last');
    const full = seq.full.data as Float32Array;
    expect(Array.from(seq.values)).toEqual(Array.from({ length: 7 }, (_, u) => full[4 * 7 + u]));
    expect(Array.from(seq.argmax!)).toEqual(Array(7).fill(4));
  });

  it('needs opset 11 or later; older models keep the JavaScript pooling', () => {
    expect(canPoolInGraph(10)).toBe(false);
    expect(canPoolInGraph(null)).toBe(false);
    expect(canPoolInGraph(11)).toBe(true);
    expect(() => exposePooled(buildModel(convSpec(10)), [{ name: 'r1', kind: 'conv', dims: [6, 8, 8], pool: 'max' }])).toThrow('Pooling inside the graph needs ONNX opset 11 or later (this model declares 10).');
  });
});
