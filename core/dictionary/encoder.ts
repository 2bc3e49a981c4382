/**
 * The dictionary's one dense product, z = X_c W_encᵀ + b_enc ([B × d] · [d × m]), two ways: a plain typed-array loop
 * and onnxruntime's blocked, vectorised Gemm on a one-node graph. Every other step touches only the k active
 * features of a probe and stays in typed arrays (sae.ts). `npx tsx bench/run.ts --only dictionary` measures both;
 * the trainer uses onnxruntime (the faster one on this machine, DEVELOPERS.md).
 */
import * as ort from 'onnxruntime-node';
import { buildModel } from '../model/writer.ts';

export interface Encoder {
  /** xc [batch × d] row-major, w [m × d] row-major, b [m] → z [batch × m]. */
  preacts(xc: Float32Array, batch: number, d: number, w: Float32Array, b: Float32Array, m: number): Promise<Float32Array>;
  release(): Promise<void>;
}

export const loopEncoder: Encoder = {
  async preacts(xc, batch, d, w, b, m) {
    const z = new Float32Array(batch * m);
    for (let r = 0; r < batch; r++) {
      const o = r * d;
      for (let j = 0; j < m; j++) {
        const q = j * d;
        let s = b[j];
        for (let i = 0; i < d; i++) s += xc[o + i] * w[q + i];
        z[r * m + j] = s;
      }
    }
    return z;
  },
  async release() {},
};

function gemmGraph(): Uint8Array {
  return buildModel({
    name: 'skein-dictionary-encode',
    inputs: [
      { name: 'X', elemType: 'float32', dims: ['n', 'd'] },
      { name: 'W', elemType: 'float32', dims: ['m', 'd'] },
      { name: 'b', elemType: 'float32', dims: ['m'] },
    ],
    outputs: [{ name: 'Z', elemType: 'float32', dims: ['n', 'm'] }],
    initializers: [],
    nodes: [{ op: 'Gemm', inputs: ['X', 'W', 'b'], outputs: ['Z'], attributes: { transB: { i: 1 } } }],
  });
}

/** onnxruntime's CPU Gemm; `threads` bounds its intra-op pool (the machine's cores by default). */
export async function createOrtEncoder(threads?: number): Promise<Encoder> {
  const session = await ort.InferenceSession.create(gemmGraph(), { graphOptimizationLevel: 'all', ...(threads ? { intraOpNumThreads: threads } : {}) });
  return {
    async preacts(xc, batch, d, w, b, m) {
      const out = await session.run({
        X: new ort.Tensor('float32', xc.subarray(0, batch * d), [batch, d]),
        W: new ort.Tensor('float32', w, [m, d]),
        b: new ort.Tensor('float32', b, [m]),
      });
      return out.Z.data as Float32Array;
    },
    release: () => session.release(),
  };
}
