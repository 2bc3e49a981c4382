import { describe, expect, it } from 'vitest';
import * as ort from 'onnxruntime-node';
import { onnx } from '../../core/model/proto.ts';
import { buildModel } from '../../core/model/writer.ts';

describe('buildModel', () => {
  it('writes a Gemm+Relu graph that onnxruntime runs to the hand-computed result', async () => {
    // W is [out=2, in=3] with transB=1, so Y = X·Wᵀ + b (ONNX operator specification: Gemm).
    const bytes = buildModel({
      name: 'gemm_relu',
      inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 3] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: ['batch', 2] }],
      initializers: [
        { name: 'W', dims: [2, 3], data: new Float32Array([1, 2, 3, -1, -2, -3]) },
        { name: 'b', dims: [2], data: new Float32Array([0.5, 1]) },
      ],
      nodes: [
        { op: 'Gemm', inputs: ['x', 'W', 'b'], outputs: ['h'], attributes: { transB: { i: 1 } } },
        { op: 'Relu', inputs: ['h'], outputs: ['y'] },
      ],
    });
    const session = await ort.InferenceSession.create(bytes, { executionProviders: ['cpu'] });
    const x = new ort.Tensor('float32', new Float32Array([1, 1, 1, 2, 0, -1]), [2, 3]);
    const { y } = await session.run({ x });
    // Hand computation: row 1: [1+2+3+0.5, -6+1] = [6.5, -5] → relu [6.5, 0];
    // row 2: [2-3+0.5, -2+3+1] = [-0.5, 2] → relu [0, 2].
    expect(y.dims).toEqual([2, 2]);
    expect(Array.from(y.data as Float32Array)).toEqual([6.5, 0, 0, 2]);
    await session.release();
  });

  it('records ir_version 8, the producer, opset 17 and raw little-endian initializers', () => {
    const bytes = buildModel({
      name: 'g',
      inputs: [{ name: 'x', elemType: 'float32', dims: [1] }],
      outputs: [{ name: 'y', elemType: 'float32', dims: [1] }],
      initializers: [{ name: 'c', dims: [1], data: new Float32Array([1.5]) }],
      nodes: [{ op: 'Add', inputs: ['x', 'c'], outputs: ['y'] }],
    });
    const model = onnx.ModelProto.decode(bytes);
    expect(Number(model.irVersion)).toBe(8);
    expect(model.producerName).toBe('skein-writer');
    expect(model.opsetImport.map((o) => [o.domain, Number(o.version)])).toEqual([['', 17]]);
    const raw = model.graph?.initializer?.[0]?.rawData ?? new Uint8Array(0);
    // 1.5 as IEEE-754 binary32 is 0x3FC00000; little-endian bytes 00 00 C0 3F (IEEE 754-2008).
    expect(Array.from(raw)).toEqual([0x00, 0x00, 0xc0, 0x3f]);
  });
});
