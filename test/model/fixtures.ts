/** Small graphs with seeded weights, and a plain-TypeScript forward pass to check onnxruntime against. */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { GraphSpec } from '../../core/model/writer.ts';

export function tempDir(): string {
  return mkdtempSync(join(tmpdir(), 'skein-model-'));
}

/** Deterministic weights without fixture files: the seeded generator the demo build uses. */
import { mulberry32 as seededRandom } from '../../sample-data/lib/prng.ts';

export { seededRandom };

export function randomArray(rand: () => number, n: number, scale = 1): Float32Array {
  const out = new Float32Array(n);
  for (let k = 0; k < n; k++) out[k] = (rand() * 2 - 1) * scale;
  return out;
}

// ---- plain forward pass (ONNX operator specification: Gemm, Conv, MaxPool, Flatten, Relu, Tanh) ----

/** Y = X·Wᵀ + b with X [n, k], W [m, k] (Gemm with transB = 1). */
export function gemmTransB(x: Float32Array, n: number, k: number, w: Float32Array, b: Float32Array, m: number): Float64Array {
  const y = new Float64Array(n * m);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < m; j++) {
      let s = b[j];
      for (let q = 0; q < k; q++) s += x[i * k + q] * w[j * k + q];
      y[i * m + j] = s;
    }
  }
  return y;
}

/** Y = X·W + b with X [n, k], W [k, m] (MatMul then Add). */
export function matmulAdd(x: ArrayLike<number>, n: number, k: number, w: Float32Array, b: Float32Array, m: number): Float64Array {
  const y = new Float64Array(n * m);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < m; j++) {
      let s = b[j];
      for (let q = 0; q < k; q++) s += x[i * k + q] * w[q * m + j];
      y[i * m + j] = s;
    }
  }
  return y;
}

export const relu = (v: ArrayLike<number>): Float64Array => Float64Array.from(v, (x) => Math.max(0, x));
export const tanh = (v: ArrayLike<number>): Float64Array => Float64Array.from(v, Math.tanh);

/** 2-D convolution, NCHW, stride 1, symmetric zero padding `pad`, group 1, as nested loops. */
export function conv2d(
  x: ArrayLike<number>, n: number, c: number, h: number, w: number,
  weight: Float32Array, bias: Float32Array, m: number, kh: number, kw: number, pad: number,
): { data: Float64Array; h: number; w: number } {
  const oh = h + 2 * pad - kh + 1;
  const ow = w + 2 * pad - kw + 1;
  const out = new Float64Array(n * m * oh * ow);
  for (let b = 0; b < n; b++) {
    for (let o = 0; o < m; o++) {
      for (let i = 0; i < oh; i++) {
        for (let j = 0; j < ow; j++) {
          let s = bias[o];
          for (let ci = 0; ci < c; ci++) {
            for (let u = 0; u < kh; u++) {
              for (let v = 0; v < kw; v++) {
                const yi = i + u - pad;
                const xj = j + v - pad;
                if (yi < 0 || yi >= h || xj < 0 || xj >= w) continue;
                s += x[((b * c + ci) * h + yi) * w + xj] * weight[((o * c + ci) * kh + u) * kw + v];
              }
            }
          }
          out[((b * m + o) * oh + i) * ow + j] = s;
        }
      }
    }
  }
  return { data: out, h: oh, w: ow };
}

/** Max pooling, NCHW, kernel k×k, stride k, no padding. */
export function maxPool2d(x: ArrayLike<number>, n: number, c: number, h: number, w: number, k: number): { data: Float64Array; h: number; w: number } {
  const oh = Math.floor((h - k) / k) + 1;
  const ow = Math.floor((w - k) / k) + 1;
  const out = new Float64Array(n * c * oh * ow);
  for (let p = 0; p < n * c; p++) {
    for (let i = 0; i < oh; i++) {
      for (let j = 0; j < ow; j++) {
        let best = -Infinity;
        for (let u = 0; u < k; u++) for (let v = 0; v < k; v++) best = Math.max(best, x[(p * h + i * k + u) * w + j * k + v]);
        out[(p * oh + i) * ow + j] = best;
      }
    }
  }
  return { data: out, h: oh, w: ow };
}

/** BatchNormalization (inference): y = scale·(x − mean)/√(var + ε) + bias, per channel of NCHW. */
export function batchNorm(
  x: ArrayLike<number>, n: number, c: number, hw: number,
  scale: Float32Array, bias: Float32Array, mean: Float32Array, variance: Float32Array, epsilon: number,
): Float64Array {
  const out = new Float64Array(n * c * hw);
  for (let b = 0; b < n; b++) {
    for (let ch = 0; ch < c; ch++) {
      const factor = scale[ch] / Math.sqrt(variance[ch] + epsilon);
      for (let p = 0; p < hw; p++) {
        const at = (b * c + ch) * hw + p;
        out[at] = (x[at] - mean[ch]) * factor + bias[ch];
      }
    }
  }
  return out;
}

// ---- graphs ----

export interface MlpWeights {
  w1: Float32Array; b1: Float32Array; w2: Float32Array; b2: Float32Array; w3: Float32Array; b3: Float32Array;
}
export const MLP = { inputs: 4, hidden1: 5, hidden2: 6, outputs: 3 };

export function mlpWeights(seed: number): MlpWeights {
  const r = seededRandom(seed);
  return {
    w1: randomArray(r, MLP.hidden1 * MLP.inputs), b1: randomArray(r, MLP.hidden1, 0.5),
    w2: randomArray(r, MLP.hidden2 * MLP.hidden1), b2: randomArray(r, MLP.hidden2, 0.5),
    w3: randomArray(r, MLP.outputs * MLP.hidden2), b3: randomArray(r, MLP.outputs, 0.5),
  };
}

/** Gemm → Relu → Gemm → Tanh → Gemm, weights [out, in] with transB = 1, symbolic batch. */
export function mlpSpec(w: MlpWeights, batch: number | string = 'batch'): GraphSpec {
  return {
    name: 'mlp',
    inputs: [{ name: 'x', elemType: 'float32', dims: [batch, MLP.inputs] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: [batch, MLP.outputs] }],
    initializers: [
      { name: 'W1', dims: [MLP.hidden1, MLP.inputs], data: w.w1 }, { name: 'b1', dims: [MLP.hidden1], data: w.b1 },
      { name: 'W2', dims: [MLP.hidden2, MLP.hidden1], data: w.w2 }, { name: 'b2', dims: [MLP.hidden2], data: w.b2 },
      { name: 'W3', dims: [MLP.outputs, MLP.hidden2], data: w.w3 }, { name: 'b3', dims: [MLP.outputs], data: w.b3 },
    ],
    nodes: [
      { op: 'Gemm', name: 'fc1', inputs: ['x', 'W1', 'b1'], outputs: ['fc1_out'], attributes: { transB: { i: 1 } } },
      { op: 'Relu', name: 'act1', inputs: ['fc1_out'], outputs: ['act1_out'] },
      { op: 'Gemm', name: 'fc2', inputs: ['act1_out', 'W2', 'b2'], outputs: ['fc2_out'], attributes: { transB: { i: 1 } } },
      { op: 'Tanh', name: 'act2', inputs: ['fc2_out'], outputs: ['act2_out'] },
      { op: 'Gemm', name: 'fc3', inputs: ['act2_out', 'W3', 'b3'], outputs: ['logits'], attributes: { transB: { i: 1 } } },
    ],
  };
}

export function mlpForward(w: MlpWeights, x: Float32Array, n: number): Record<string, Float64Array> {
  const fc1 = gemmTransB(x, n, MLP.inputs, w.w1, w.b1, MLP.hidden1);
  const act1 = relu(fc1);
  const fc2 = gemmTransB(Float32Array.from(act1), n, MLP.hidden1, w.w2, w.b2, MLP.hidden2);
  const act2 = tanh(fc2);
  const logits = gemmTransB(Float32Array.from(act2), n, MLP.hidden2, w.w3, w.b3, MLP.outputs);
  return { fc1_out: fc1, act1_out: act1, fc2_out: fc2, act2_out: act2, logits };
}

export interface CnnWeights { conv: Float32Array; convBias: Float32Array; fc: Float32Array; fcBias: Float32Array }
export const CNN = { channels: 2, size: 6, filters: 3, kernel: 3, classes: 4 };
const CNN_FLAT = CNN.filters * (CNN.size / 2) * (CNN.size / 2);

export function cnnWeights(seed: number): CnnWeights {
  const r = seededRandom(seed);
  return {
    conv: randomArray(r, CNN.filters * CNN.channels * CNN.kernel * CNN.kernel), convBias: randomArray(r, CNN.filters, 0.3),
    fc: randomArray(r, CNN.classes * CNN_FLAT, 0.5), fcBias: randomArray(r, CNN.classes, 0.3),
  };
}

/** Conv 3×3 pad 1 → Relu → MaxPool 2×2 → Flatten → Gemm; no value_info, so hidden shapes are inferred. */
export function cnnSpec(w: CnnWeights): GraphSpec {
  return {
    name: 'cnn',
    inputs: [{ name: 'image', elemType: 'float32', dims: ['N', CNN.channels, CNN.size, CNN.size] }],
    outputs: [{ name: 'scores', elemType: 'float32', dims: ['N', CNN.classes] }],
    initializers: [
      { name: 'K', dims: [CNN.filters, CNN.channels, CNN.kernel, CNN.kernel], data: w.conv },
      { name: 'Kb', dims: [CNN.filters], data: w.convBias },
      { name: 'F', dims: [CNN.classes, CNN_FLAT], data: w.fc },
      { name: 'Fb', dims: [CNN.classes], data: w.fcBias },
    ],
    nodes: [
      { op: 'Conv', name: 'conv', inputs: ['image', 'K', 'Kb'], outputs: ['conv_out'], attributes: { pads: { ints: [1, 1, 1, 1] }, kernel_shape: { ints: [3, 3] } } },
      { op: 'Relu', name: 'conv_relu', inputs: ['conv_out'], outputs: ['relu_out'] },
      { op: 'MaxPool', name: 'pool', inputs: ['relu_out'], outputs: ['pool_out'], attributes: { kernel_shape: { ints: [2, 2] }, strides: { ints: [2, 2] } } },
      { op: 'Flatten', name: 'flatten', inputs: ['pool_out'], outputs: ['flat_out'], attributes: { axis: { i: 1 } } },
      { op: 'Gemm', name: 'head', inputs: ['flat_out', 'F', 'Fb'], outputs: ['scores'], attributes: { transB: { i: 1 } } },
    ],
  };
}

export function cnnForward(w: CnnWeights, x: Float32Array, n: number): Record<string, Float64Array> {
  const conv = conv2d(x, n, CNN.channels, CNN.size, CNN.size, w.conv, w.convBias, CNN.filters, CNN.kernel, CNN.kernel, 1);
  const act = relu(conv.data);
  const pool = maxPool2d(act, n, CNN.filters, conv.h, conv.w, 2);
  // Flatten(axis 1) of NCHW keeps memory order, so the pooled buffer is already [n, C·H·W].
  const scores = gemmTransB(Float32Array.from(pool.data), n, CNN_FLAT, w.fc, w.fcBias, CNN.classes);
  return { conv_out: conv.data, relu_out: act, pool_out: pool.data, flat_out: pool.data, scores };
}
