/**
 * Builds a study file directly with the store's schema (core/store), without running a model: rows are written in
 * primary-key order in large transactions, so a 3.2 GB study takes seconds, not a scan's minutes.
 * The result is a complete study (run, labels, one dense layer, every chunk done) that scoreStudy accepts.
 */
import fs from 'node:fs';
import { openStudyDb, checkpoint, inTransaction } from '../../core/store/study.ts';
import { bindStudy, insertLayer } from '../../core/store/binding.ts';
import { writeUnitChunks, markChunksDone } from '../../core/store/activations.ts';
import { SyntheticActivations, type SyntheticSpec } from './synthetic.ts';

export interface BuiltStudy {
  file: string;
  spec: SyntheticSpec;
  chunkSize: number;
  activationBytes: number;
  fileBytes: number;
  seconds: number;
}

export function removeStudy(file: string): void {
  for (const f of [file, `${file}-wal`, `${file}-shm`]) fs.rmSync(f, { force: true });
}

/** Layers of at most `layerUnits` units (the last may be smaller); one layer when unset. */
export function buildStudy(file: string, spec: SyntheticSpec, opts: { chunkSize?: number; layerUnits?: number } = {}): BuiltStudy {
  const started = process.hrtime.bigint();
  const chunkSize = opts.chunkSize ?? 1024;
  const layerUnits = opts.layerUnits ?? spec.units;
  removeStudy(file);
  const source = new SyntheticActivations(spec);
  // a fixture build, not the measured write path: no fsync per commit
  const db = openStudyDb(file, { create: true, unsynced: true });
  try {
    bindStudy(db,
      { path: 'synthetic.onnx', fingerprint: `synthetic-${spec.seed}-${spec.units}`, json: '{}' },
      { dir: 'synthetic', fingerprint: `synthetic-${spec.seed}-${spec.probes}-${spec.labels}`, name: 'synthetic', count: spec.probes,
        labels: source.labels.labels, labelOffsets: source.labels.labelOffsets, labelIds: source.labels.labelIds, concepts: null, examples: null, relatedness: null },
      chunkSize);
    const chunks = Math.ceil(spec.probes / chunkSize);
    const values = new Float32Array(spec.probes);
    const layerCount = Math.ceil(spec.units / layerUnits);
    for (let layer = 0; layer < layerCount; layer++) {
      const first = layer * layerUnits;
      const units = Math.min(layerUnits, spec.units - first);
      const name = layerCount === 1 ? 'synthetic' : `synthetic${layer}`;
      const id = insertLayer(db, { name, op: 'Relu', node: name, position: layer, dims: [units], kind: 'dense', units, pool: 'none' });
      const batch = 64; // units per transaction
      for (let u0 = 0; u0 < units; u0 += batch) {
        inTransaction(db, () => {
          for (let u = u0; u < Math.min(units, u0 + batch); u++) {
            source.fill(first + u, values);
            writeUnitChunks(db, id, u, chunkSize, values);
          }
        });
      }
      markChunksDone(db, id, Array.from({ length: chunks }, (_, c) => c));
    }
    checkpoint(db);
  } finally {
    db.close();
  }
  return {
    file, spec, chunkSize, activationBytes: spec.units * spec.probes * 4,
    fileBytes: fs.statSync(file).size, seconds: Number(process.hrtime.bigint() - started) / 1e9,
  };
}
