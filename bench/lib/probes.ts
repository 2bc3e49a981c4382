/** Benchmark probe sets: seeded random inputs and random labels, written as a real probe-set folder. */
import fs from 'node:fs';
import path from 'node:path';
import { writeNpyFloat32 } from '../../core/probes/index.ts';
import { rng } from './random.ts';

export function labelName(id: number): string {
  return `c${String(id).padStart(3, '0')}`;
}

/**
 * 1–3 distinct labels per probe, drawn uniformly from `labelCount` (so each label is on ≈ 2/L of the probes).
 * Returns CSR arrays with label ids ascending per probe, the order core/probes gives.
 */
export function randomLabels(probes: number, labelCount: number, seed: number): { offsets: Int32Array; ids: Int32Array } {
  const r = rng(seed);
  const offsets = new Int32Array(probes + 1);
  const ids: number[] = [];
  const picked = new Set<number>();
  for (let p = 0; p < probes; p++) {
    const k = Math.min(labelCount, 1 + Math.floor(r() * 3));
    picked.clear();
    while (picked.size < k) picked.add(Math.floor(r() * labelCount));
    ids.push(...[...picked].sort((a, b) => a - b));
    offsets[p + 1] = ids.length;
  }
  return { offsets, ids: Int32Array.from(ids) };
}

export interface WrittenProbes {
  dir: string;
  count: number;
  offsets: Int32Array;
  ids: Int32Array;
}

/** Writes x.npy (uniform [0, 1) inputs, in slabs so memory stays small), labels.csv and manifest.json. */
export function writeProbeSet(dir: string, inputName: string, rowShape: number[], count: number, labelCount: number, seed: number): WrittenProbes {
  fs.mkdirSync(dir, { recursive: true });
  const rowSize = rowShape.reduce((a, b) => a * b, 1);
  const r = rng(seed);
  const slabRows = 1024;
  function* slabs(): Generator<Float32Array> {
    for (let start = 0; start < count; start += slabRows) {
      const rows = Math.min(slabRows, count - start);
      const slab = new Float32Array(rows * rowSize);
      for (let i = 0; i < slab.length; i++) slab[i] = r();
      yield slab;
    }
  }
  writeNpyFloat32(path.join(dir, 'x.npy'), [count, ...rowShape], slabs());
  const { offsets, ids } = randomLabels(count, labelCount, seed + 1);
  const lines = ['probe,label'];
  for (let p = 0; p < count; p++) for (let k = offsets[p]; k < offsets[p + 1]; k++) lines.push(`${p},${labelName(ids[k])}`);
  fs.writeFileSync(path.join(dir, 'labels.csv'), lines.join('\n') + '\n');
  fs.writeFileSync(path.join(dir, 'manifest.json'), JSON.stringify({ name: path.basename(dir), inputs: { [inputName]: 'x.npy' }, labels: 'labels.csv' }, null, 1));
  return { dir, count, offsets, ids };
}
