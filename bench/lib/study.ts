/**
 * Builds a study file directly with the store's schema (core/store), without running a model: rows are written in
 * primary-key order in large transactions, so a 3.2 GB study takes seconds, not a scan's minutes.
 * The result is a complete study (run, labels, one dense layer, every chunk done) that scoreStudy accepts.
 */
import fs from 'node:fs';
import { openStudyDb, floatsToBlob, now } from '../../core/store/study.ts';
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
  const db = openStudyDb(file, { create: true });
  try {
    // a fixture build, not the measured write path: no fsync per commit
    db.pragma('synchronous = OFF');
    const t = now();
    db.transaction(() => {
      db.prepare(`INSERT INTO run (id, model_path, model_fp, model_json, probes_dir, probes_fp, probes_name, probe_count, chunk_size, created_at, updated_at)
        VALUES (1, 'synthetic.onnx', ?, '{}', 'synthetic', ?, 'synthetic', ?, ?, ?, ?)`)
        .run(`synthetic-${spec.seed}-${spec.units}`, `synthetic-${spec.seed}-${spec.probes}-${spec.labels}`, spec.probes, chunkSize, t, t);
      const insLabel = db.prepare(`INSERT INTO label (id, name) VALUES (?, ?)`);
      source.labels.labels.forEach((name, id) => insLabel.run(id, name));
      const insPL = db.prepare(`INSERT INTO probe_label (probe, label) VALUES (?, ?)`);
      const { labelOffsets, labelIds } = source.labels;
      for (let p = 0; p < spec.probes; p++) for (let k = labelOffsets[p]; k < labelOffsets[p + 1]; k++) insPL.run(p, labelIds[k]);
    })();
    const chunks = Math.ceil(spec.probes / chunkSize);
    const insLayer = db.prepare(`INSERT INTO layer (id, name, op, node, position, dims_json, kind, units, pool) VALUES (?, ?, 'Relu', ?, ?, ?, 'dense', ?, 'none')`);
    const insAct = db.prepare(`INSERT INTO activation (layer_id, unit, chunk, vals, argmax) VALUES (?, ?, ?, ?, NULL)`);
    const insDone = db.prepare(`INSERT INTO chunk_done (layer_id, chunk) VALUES (?, ?)`);
    const values = new Float32Array(spec.probes);
    const layerCount = Math.ceil(spec.units / layerUnits);
    for (let layer = 0; layer < layerCount; layer++) {
      const first = layer * layerUnits;
      const units = Math.min(layerUnits, spec.units - first);
      const id = layer + 1;
      const name = layerCount === 1 ? 'synthetic' : `synthetic${layer}`;
      insLayer.run(id, name, name, layer, JSON.stringify([units]), units);
      const batch = 64; // units per transaction
      for (let u0 = 0; u0 < units; u0 += batch) {
        db.transaction(() => {
          for (let u = u0; u < Math.min(units, u0 + batch); u++) {
            source.fill(first + u, values);
            for (let c = 0; c < chunks; c++) {
              insAct.run(id, u, c, floatsToBlob(values.subarray(c * chunkSize, Math.min(spec.probes, (c + 1) * chunkSize))));
            }
          }
        })();
      }
      db.transaction(() => { for (let c = 0; c < chunks; c++) insDone.run(id, c); })();
    }
    db.pragma('wal_checkpoint(TRUNCATE)');
  } finally {
    db.close();
  }
  return {
    file, spec, chunkSize, activationBytes: spec.units * spec.probes * 4,
    fileBytes: fs.statSync(file).size, seconds: Number(process.hrtime.bigint() - started) / 1e9,
  };
}
