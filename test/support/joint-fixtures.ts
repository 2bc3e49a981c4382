/**
 * Planted units with known drivers for the joint model (core/score/joint.ts). Every probe's input is the multi-hot of
 * its labels followed by NOISE_COLUMNS uniform noise columns of unit variance; every unit is ReLU(w·x + b) with
 * weights set by hand, so the right drivers, concept count and formula follow from the construction. The same units
 * run in memory (test/score/joint-planted.test.ts) and as an ONNX Gemm + Relu through onnxruntime and a SQLite study
 * (test/pipeline/joint-planted.test.ts).
 */
import fs from 'node:fs';
import path from 'node:path';
import { buildModel } from '../../core/model/writer.ts';
import { rng, writeProbeSet } from './fixtures.ts';

export const JOINT_LABELS = ['p1', 'p2', 'p3', 'r1', 'r2', 'r3', 'a', 'b', 'c', 'g', 'd', 'm', 's', 'S'];
export const NOISE_COLUMNS = 4;

export interface PlantedCase {
  name: string;
  weights: Record<string, number>;
  bias: number;
  noise: number; // weight on each noise column
  drivers: string[];          // expected drivers, compounds as "a & b"
  modulators?: string[];
  nested?: string[];
  count: [number, number];    // expected concept count range
  formula: string | null;     // expected formula (terms in any order)
  minIou: number;
  flags?: string[];
}

export const JOINT_CASES: PlantedCase[] = [
  { name: 'conjunction', weights: { a: 2, b: 2 }, bias: -3, noise: 0.02, drivers: ['a & b'], count: [1, 1], formula: 'a & b', minIou: 0.8 },
  { name: 'either common', weights: { p1: 1, p2: 1 }, bias: 0, noise: 0.02, drivers: ['p1', 'p2'], count: [1.9, 2], formula: 'p1 | p2', minIou: 0.8 },
  { name: 'either rare', weights: { r1: 1, r2: 1 }, bias: 0, noise: 0.02, drivers: ['r1', 'r2'], count: [1.9, 2], formula: 'r1 | r2', minIou: 0.8 },
  { name: 'common and rare', weights: { c: 1, r3: 1 }, bias: 0, noise: 0.02, drivers: ['c', 'r3'], count: [1.9, 2], formula: 'c | r3', minIou: 0.8 },
  { name: 'graded shift', weights: { g: 1.5 }, bias: 3, noise: 0.5, drivers: ['g'], count: [1, 1], formula: 'g', minIou: 0.4 },
  { name: 'modulator', weights: { d: 3, m: 2 }, bias: -2, noise: 0.02, drivers: ['d'], modulators: ['m'], count: [1, 1], formula: 'd', minIou: 0.8 },
  { name: 'nested', weights: { s: 1 }, bias: 0, noise: 0.02, drivers: ['s'], nested: ['S'], count: [1, 1], formula: 's', minIou: 0.8 },
  { name: 'dense', weights: {}, bias: 2, noise: 0.02, drivers: [], count: [0, 0], formula: null, minIou: 0, flags: ['dense'] },
  { name: 'dead', weights: {}, bias: -1, noise: 0.02, drivers: [], count: [0, 0], formula: null, minIou: 0, flags: ['dead'] },
  { name: 'noise only', weights: {}, bias: -1, noise: 0.5, drivers: [], count: [0, 0], formula: null, minIou: 0 },
];

/** Labels per probe: a partition p1/p2/p3 (a third each), rare r1/r2/r3 (3 % each, exclusive), independent a, b (30 %),
 *  c (40 %), g, d (30 %), m (40 %), s (10 %) and S ⊃ s (s plus 10 % of the rest). */
export function jointProbes(n: number, seed: number): { rows: Float32Array; labels: string[][]; width: number } {
  const r = rng(seed);
  const width = JOINT_LABELS.length + NOISE_COLUMNS;
  const rows = new Float32Array(n * width);
  const labels: string[][] = [];
  for (let i = 0; i < n; i++) {
    const ls = [['p1', 'p2', 'p3'][Math.floor(r() * 3)]];
    const rare = r();
    if (rare < 0.03) ls.push('r1');
    else if (rare < 0.06) ls.push('r2');
    else if (rare < 0.09) ls.push('r3');
    for (const [label, p] of [['a', 0.3], ['b', 0.3], ['c', 0.4], ['g', 0.3], ['d', 0.3], ['m', 0.4]] as const) if (r() < p) ls.push(label);
    if (r() < 0.1) ls.push('s', 'S');
    else if (r() < 0.1) ls.push('S');
    labels.push(ls);
    for (const l of ls) rows[i * width + JOINT_LABELS.indexOf(l)] = 1;
    for (let k = 0; k < NOISE_COLUMNS; k++) rows[i * width + JOINT_LABELS.length + k] = (2 * r() - 1) * Math.sqrt(3);
  }
  return { rows, labels, width };
}

/** The units' weights as a Gemm B matrix [width, units] and bias. */
export function jointWeights(width: number): { w: Float32Array; b: Float32Array } {
  const units = JOINT_CASES.length;
  const w = new Float32Array(width * units);
  const b = new Float32Array(units);
  JOINT_CASES.forEach((u, j) => {
    for (const [label, v] of Object.entries(u.weights)) w[JOINT_LABELS.indexOf(label) * units + j] = v;
    for (let k = 0; k < NOISE_COLUMNS; k++) w[(JOINT_LABELS.length + k) * units + j] = u.noise;
    b[j] = u.bias;
  });
  return { w, b };
}

/** ReLU(x·W + b) in float32 arithmetic order close to the runtime's (for the in-memory test). */
export function jointActivations(rows: Float32Array, width: number): Float32Array[] {
  const { w, b } = jointWeights(width);
  const units = JOINT_CASES.length;
  const n = rows.length / width;
  return JOINT_CASES.map((_, j) => {
    const out = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      let v = b[j];
      for (let k = 0; k < width; k++) v += rows[i * width + k] * w[k * units + j];
      out[i] = Math.max(0, v);
    }
    return out;
  });
}

export function writeJointPlanted(dir: string, n = 6000, seed = 11): { model: string; probes: string } {
  const { rows, labels, width } = jointProbes(n, seed);
  const { w, b } = jointWeights(width);
  const units = JOINT_CASES.length;
  const model = path.join(dir, 'joint.onnx');
  fs.writeFileSync(model, buildModel({
    name: 'joint-planted',
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', width] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', 2] }],
    initializers: [
      { name: 'W', dims: [width, units], data: w },
      { name: 'b', dims: [units], data: b },
      { name: 'H', dims: [units, 2], data: new Float32Array(units * 2).map((_, i) => (i % 3) * 0.1) },
    ],
    nodes: [
      { op: 'Gemm', name: 'hidden', inputs: ['x', 'W', 'b'], outputs: ['pre'] },
      { op: 'Relu', name: 'act', inputs: ['pre'], outputs: ['planted'] },
      { op: 'Gemm', name: 'head', inputs: ['planted', 'H'], outputs: ['logits'] },
    ],
  }));
  const probes = writeProbeSet({ dir: path.join(dir, 'joint-probes'), inputName: 'x', rows, rowShape: [width], labels });
  return { model, probes };
}
