/** Benchmark models of realistic width, built with core/model/writer.ts from seeded random weights. */
import { buildModel, type NodeSpec, type TensorSpec } from '../../core/model/writer.ts';
import { uniform } from './random.ts';

export interface BenchModel {
  name: string;
  bytes: Uint8Array;
  inputName: string;
  /** Per-probe input shape (after the batch axis). */
  rowShape: number[];
  description: string;
}

/** He-uniform weights (He et al. 2015 scale, uniform form: common practice) so activations stay O(1) layer to layer. */
function heWeights(name: string, dims: number[], fanIn: number, seed: number): TensorSpec {
  const limit = Math.sqrt(6 / fanIn);
  return { name, dims, data: uniform(dims.reduce((a, b) => a * b, 1), -limit, limit, seed) };
}

function bias(name: string, size: number, seed: number): TensorSpec {
  return { name, dims: [size], data: uniform(size, -0.05, 0.05, seed) };
}

/** x[batch, widths[0]] → (Gemm → Relu) per hidden width → Gemm → logits. */
export function mlp(widths: number[], seed = 1): BenchModel {
  const initializers: TensorSpec[] = [];
  const nodes: NodeSpec[] = [];
  let input = 'x';
  for (let k = 0; k + 1 < widths.length; k++) {
    const last = k + 2 === widths.length;
    initializers.push(heWeights(`W${k}`, [widths[k], widths[k + 1]], widths[k], seed * 100 + k));
    initializers.push(bias(`b${k}`, widths[k + 1], seed * 100 + 50 + k));
    const pre = last ? 'logits' : `pre${k}`;
    nodes.push({ op: 'Gemm', name: `fc${k}`, inputs: [input, `W${k}`, `b${k}`], outputs: [pre] });
    if (!last) {
      nodes.push({ op: 'Relu', name: `relu${k}`, inputs: [pre], outputs: [`hidden${k}`] });
      input = `hidden${k}`;
    }
  }
  const bytes = buildModel({
    name: 'bench-mlp',
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', widths[0]] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', widths[widths.length - 1]] }],
    initializers,
    nodes,
  });
  return { name: `mlp-${widths.join('-')}`, bytes, inputName: 'x', rowShape: [widths[0]], description: `MLP ${widths.join('-')} (Gemm+Relu)` };
}

/**
 * x[batch, 1, S, S] → Conv(c1, 3×3, pad 1) → Relu → MaxPool 2 → Conv(c2, 3×3, pad 1) → Relu → MaxPool 2
 * → Flatten → Gemm(fc) → Relu → Gemm(10).
 */
export function cnn(size: number, c1: number, c2: number, fc: number, seed = 2): BenchModel {
  const flat = c2 * (size / 4) * (size / 4);
  const initializers: TensorSpec[] = [
    heWeights('K1', [c1, 1, 3, 3], 9, seed * 100 + 1), bias('k1', c1, seed * 100 + 2),
    heWeights('K2', [c2, c1, 3, 3], 9 * c1, seed * 100 + 3), bias('k2', c2, seed * 100 + 4),
    heWeights('F1', [flat, fc], flat, seed * 100 + 5), bias('f1', fc, seed * 100 + 6),
    heWeights('F2', [fc, 10], fc, seed * 100 + 7), bias('f2', 10, seed * 100 + 8),
    { name: 'flat_shape', dims: [2], data: BigInt64Array.from([0n, BigInt(flat)]) },
  ];
  const conv = { kernel_shape: { ints: [3, 3] }, pads: { ints: [1, 1, 1, 1] } };
  const pool = { kernel_shape: { ints: [2, 2] }, strides: { ints: [2, 2] } };
  const nodes: NodeSpec[] = [
    { op: 'Conv', name: 'conv1', inputs: ['x', 'K1', 'k1'], outputs: ['c1'], attributes: conv },
    { op: 'Relu', name: 'relu1', inputs: ['c1'], outputs: ['r1'] },
    { op: 'MaxPool', name: 'pool1', inputs: ['r1'], outputs: ['p1'], attributes: pool },
    { op: 'Conv', name: 'conv2', inputs: ['p1', 'K2', 'k2'], outputs: ['c2'], attributes: conv },
    { op: 'Relu', name: 'relu2', inputs: ['c2'], outputs: ['r2'] },
    { op: 'MaxPool', name: 'pool2', inputs: ['r2'], outputs: ['p2'], attributes: pool },
    { op: 'Reshape', name: 'flatten', inputs: ['p2', 'flat_shape'], outputs: ['flat'] },
    { op: 'Gemm', name: 'fc1', inputs: ['flat', 'F1', 'f1'], outputs: ['h'] },
    { op: 'Relu', name: 'relu3', inputs: ['h'], outputs: ['r3'] },
    { op: 'Gemm', name: 'fc2', inputs: ['r3', 'F2', 'f2'], outputs: ['logits'] },
  ];
  const bytes = buildModel({
    name: 'bench-cnn',
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 1, size, size] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', 10] }],
    initializers,
    nodes,
  });
  return {
    name: `cnn-${size}-${c1}-${c2}-${fc}`, bytes, inputName: 'x', rowShape: [1, size, size],
    description: `CNN 1×${size}×${size} → conv${c1} → pool → conv${c2} → pool → fc${fc} → 10`,
  };
}
