/**
 * The lens's heavy arithmetic as two tiny ONNX graphs run by onnxruntime's CPU kernels (the runtime Skein already
 * ships): its matrix products are blocked and vectorised, which plain JavaScript loops are not. Inputs are handed
 * over without copying; every product is float32 with results accumulated in float64 by the caller.
 */
import * as ort from 'onnxruntime-node';
import { buildModel } from '../model/writer.ts';

/**
 * One evaluation of C independent L2-free logistic losses and their gradients (the penalty is added by the
 * caller): Z = X W + b, loss_c = Σ_i M_ic (softplus(Z_ic) − Y_ic Z_ic), G = Xᵀ R, g_b = Σ_i R_ic with
 * R = M ⊙ (σ(Z) − Y) (the logistic log-likelihood gradient; Hastie, Tibshirani & Friedman, ESL §4.4.1).
 * M carries each column's training mask already divided by its training-set size.
 */
function logisticGraph(): Uint8Array {
  return buildModel({
    name: 'skein-lens-logistic',
    inputs: [
      { name: 'X', elemType: 'float32', dims: ['n', 'k'] },
      { name: 'W', elemType: 'float32', dims: ['k', 'c'] },
      { name: 'b', elemType: 'float32', dims: [1, 'c'] },
      { name: 'Y', elemType: 'float32', dims: ['n', 'c'] },
      { name: 'M', elemType: 'float32', dims: ['n', 'c'] },
    ],
    outputs: [
      { name: 'Z', elemType: 'float32', dims: ['n', 'c'] },
      { name: 'loss', elemType: 'float32', dims: ['c'] },
      { name: 'G', elemType: 'float32', dims: ['k', 'c'] },
      { name: 'gb', elemType: 'float32', dims: ['c'] },
    ],
    initializers: [{ name: 'axis0', dims: [1], data: BigInt64Array.from([0n]) }],
    nodes: [
      { op: 'MatMul', inputs: ['X', 'W'], outputs: ['XW'] },
      { op: 'Add', inputs: ['XW', 'b'], outputs: ['Z'] },
      { op: 'Softplus', inputs: ['Z'], outputs: ['sp'] },
      { op: 'Mul', inputs: ['Y', 'Z'], outputs: ['yz'] },
      { op: 'Sub', inputs: ['sp', 'yz'], outputs: ['nll'] },
      { op: 'Mul', inputs: ['M', 'nll'], outputs: ['mnll'] },
      { op: 'ReduceSum', inputs: ['mnll', 'axis0'], outputs: ['loss'], attributes: { keepdims: { i: 0 } } },
      { op: 'Sigmoid', inputs: ['Z'], outputs: ['p'] },
      { op: 'Sub', inputs: ['p', 'Y'], outputs: ['py'] },
      { op: 'Mul', inputs: ['M', 'py'], outputs: ['R'] },
      { op: 'Gemm', inputs: ['X', 'R'], outputs: ['G'], attributes: { transA: { i: 1 } } },
      { op: 'ReduceSum', inputs: ['R', 'axis0'], outputs: ['gb'], attributes: { keepdims: { i: 0 } } },
    ],
  });
}

/** Xᵀ X of one block of rows (the covariance's cross products). */
function crossGraph(): Uint8Array {
  return buildModel({
    name: 'skein-lens-cross',
    inputs: [{ name: 'X', elemType: 'float32', dims: ['n', 'k'] }],
    outputs: [{ name: 'XtX', elemType: 'float32', dims: ['k', 'k'] }],
    initializers: [],
    nodes: [{ op: 'Gemm', inputs: ['X', 'X'], outputs: ['XtX'], attributes: { transA: { i: 1 } } }],
  });
}

export interface LogisticOutputs { z: Float32Array; loss: Float32Array; grad: Float32Array; gradBias: Float32Array }

export interface Kernels {
  /** X [n × k], W [k × c], b [c], Y and M [n × c], all row-major. */
  logistic(x: Float32Array, n: number, k: number, w: Float32Array, b: Float32Array, y: Float32Array, m: Float32Array, c: number): Promise<LogisticOutputs>;
  /** Xᵀ X for X [n × k] row-major, as [k × k]. */
  cross(x: Float32Array, n: number, k: number): Promise<Float32Array>;
  release(): Promise<void>;
}

/** Sessions for one lens run; `threads` bounds onnxruntime's intra-op pool (the machine's cores by default). */
export async function createKernels(threads?: number): Promise<Kernels> {
  const options: ort.InferenceSession.SessionOptions = { graphOptimizationLevel: 'all', ...(threads ? { intraOpNumThreads: threads } : {}) };
  const logistic = await ort.InferenceSession.create(logisticGraph(), options);
  const cross = await ort.InferenceSession.create(crossGraph(), options);
  return {
    async logistic(x, n, k, w, b, y, m, c) {
      const out = await logistic.run({
        X: new ort.Tensor('float32', x.subarray(0, n * k), [n, k]),
        W: new ort.Tensor('float32', w, [k, c]),
        b: new ort.Tensor('float32', b, [1, c]),
        Y: new ort.Tensor('float32', y, [n, c]),
        M: new ort.Tensor('float32', m, [n, c]),
      });
      return { z: out.Z.data as Float32Array, loss: out.loss.data as Float32Array, grad: out.G.data as Float32Array, gradBias: out.gb.data as Float32Array };
    },
    async cross(x, n, k) {
      const out = await cross.run({ X: new ort.Tensor('float32', x.subarray(0, n * k), [n, k]) });
      return out.XtX.data as Float32Array;
    },
    async release() {
      await logistic.release();
      await cross.release();
    },
  };
}
