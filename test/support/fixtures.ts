/** Builders for test fixtures: temporary folders, probe sets and small ONNX models made in the test. */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { writeNpyFloat32 } from '../../core/probes/index.ts';
import { buildModel } from '../../core/model/writer.ts';

export function tempDir(prefix = 'skein-test-'): string {
  return fs.mkdtempSync(path.join(os.tmpdir(), prefix));
}

/** Seeded PRNG so fixtures are the same on every run: the generator the demo build uses (mulberry32). */
import { mulberry32 as rng } from '../../sample-data/lib/prng.ts';

export { rng };

export interface ProbeSetSpec {
  dir: string;
  inputName: string;
  rows: Float32Array;
  rowShape: number[];
  labels: string[][];                      // labels per probe
  concepts?: { label: string; group: string; parent?: string }[];
}

export function writeProbeSet(spec: ProbeSetSpec): string {
  fs.mkdirSync(spec.dir, { recursive: true });
  const n = spec.labels.length;
  writeNpyFloat32(path.join(spec.dir, 'x.npy'), [n, ...spec.rowShape], spec.rows);
  const lines = ['probe,label'];
  spec.labels.forEach((ls, p) => ls.forEach((l) => lines.push(`${p},${l}`)));
  fs.writeFileSync(path.join(spec.dir, 'labels.csv'), lines.join('\n') + '\n');
  const manifest: Record<string, unknown> = { name: path.basename(spec.dir), inputs: { [spec.inputName]: 'x.npy' }, labels: 'labels.csv' };
  if (spec.concepts) {
    fs.writeFileSync(path.join(spec.dir, 'concepts.csv'), ['label,group,parent', ...spec.concepts.map((c) => `${c.label},${c.group},${c.parent ?? ''}`)].join('\n') + '\n');
    manifest.concepts = 'concepts.csv';
  }
  fs.writeFileSync(path.join(spec.dir, 'manifest.json'), JSON.stringify(manifest, null, 1));
  return spec.dir;
}

/**
 * The planted scenario: every probe has one hue, one form and one place; the input is the multi-hot of its labels
 * followed by NOISE uniform tie-breakers. Unit weights are set by hand so each unit's behaviour is known by construction.
 */
// Six hues, four forms, four places: base rates low enough that a label sharing a unit's top set with another
// is still clearly enriched there.
export const HUES = ['red', 'orange', 'blue', 'green', 'violet', 'grey'];
export const FORMS = ['circle', 'square', 'star', 'ring'];
export const PLACES = ['top', 'bottom', 'left', 'right'];
export const PLANTED_LABELS = [...HUES, ...FORMS, ...PLACES];
export const NOISE = 2;

export function plantedProbes(n: number, seed: number): { rows: Float32Array; labels: string[][]; width: number } {
  const r = rng(seed);
  const width = PLANTED_LABELS.length + NOISE;
  const rows = new Float32Array(n * width);
  const labels: string[][] = [];
  const pick = (xs: string[]) => xs[Math.floor(r() * xs.length)];
  for (let p = 0; p < n; p++) {
    const ls = [pick(HUES), pick(FORMS), pick(PLACES)];
    labels.push(ls);
    for (const l of ls) rows[p * width + PLANTED_LABELS.indexOf(l)] = 1;
    for (let k = 0; k < NOISE; k++) rows[p * width + PLANTED_LABELS.length + k] = r();
  }
  return { rows, labels, width };
}

/** Planted units: name → (label weights, bias). Noise weights are tiny tie-breakers. */
export const PLANTED_UNITS: { name: string; weights: Record<string, number>; bias: number; noise: number }[] = [
  { name: 'mono-red', weights: { red: 1 }, bias: 0, noise: 0.001 },
  { name: 'blue+square', weights: { blue: 1, square: 1 }, bias: 0, noise: 0.001 },
  { name: 'red+orange', weights: { red: 1, orange: 1 }, bias: 0, noise: 0.001 },
  { name: 'red+circle+top', weights: { red: 1, circle: 1, top: 1 }, bias: 0, noise: 0.001 },
  { name: 'dead', weights: {}, bias: -1, noise: -0.5 },
  { name: 'dense', weights: {}, bias: 1, noise: 0.05 },
  { name: 'mono-star', weights: { star: 1 }, bias: 0, noise: 0.001 },
];

/** x → Gemm(W, b) → Relu → Gemm → logits: the hidden Relu output ("planted") carries the planted units. */
export function plantedModel(width: number): Uint8Array {
  const units = PLANTED_UNITS.length;
  const w = new Float32Array(width * units); // Gemm B is [K, M] with transB = 0
  const b = new Float32Array(units);
  PLANTED_UNITS.forEach((u, j) => {
    for (const [label, v] of Object.entries(u.weights)) w[PLANTED_LABELS.indexOf(label) * units + j] = v;
    for (let k = 0; k < NOISE; k++) w[(PLANTED_LABELS.length + k) * units + j] = u.noise * (k === 0 ? 1 : 0.5);
    b[j] = u.bias;
  });
  const head = new Float32Array(units * 2).map((_, i) => (i % 3) * 0.1);
  return buildModel({
    name: 'planted',
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', width] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', 2] }],
    initializers: [
      { name: 'W', dims: [width, units], data: w },
      { name: 'b', dims: [units], data: b },
      { name: 'H', dims: [units, 2], data: head },
    ],
    nodes: [
      { op: 'Gemm', name: 'hidden', inputs: ['x', 'W', 'b'], outputs: ['pre'] },
      { op: 'Relu', name: 'act', inputs: ['pre'], outputs: ['planted'] },
      { op: 'Gemm', name: 'head', inputs: ['planted', 'H'], outputs: ['logits'] },
    ],
  });
}

export function writePlanted(dir: string, n = 4000, seed = 7): { model: string; probes: string } {
  const { rows, labels, width } = plantedProbes(n, seed);
  const model = path.join(dir, 'planted.onnx');
  fs.writeFileSync(model, plantedModel(width));
  const probes = writeProbeSet({
    dir: path.join(dir, 'planted-probes'), inputName: 'x', rows, rowShape: [width], labels,
    concepts: [
      ...HUES.map((l) => ({ label: l, group: 'hue', parent: l === 'red' || l === 'orange' ? 'warm' : 'cool' })),
      ...FORMS.map((l) => ({ label: l, group: 'form' })),
      ...PLACES.map((l) => ({ label: l, group: 'place' })),
    ],
  });
  return { model, probes };
}
