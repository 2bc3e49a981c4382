/**
 * The study binding repository: which model and probe set a study is bound to (the `run` table, one row), its
 * captured layers, and the probe set's labels, concepts, examples and relatedness override as copied into the study.
 * The only code that reads or writes those tables.
 */
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import type { ConceptRow, ExampleRow } from '../probes/types.ts';
import { now } from './study.ts';

/** What a study is bound to: the model and probe set (by fingerprint) and the chunk size of its activations. */
export interface StudyBinding {
  modelPath: string; modelFp: string; modelJson: string;
  probesDir: string; probesFp: string; probesName: string;
  probeCount: number; chunkSize: number;
  createdAt: string; updatedAt: string;
}

export type LayerKind = 'dense' | 'conv' | 'sequence' | 'flat';

export interface LayerRow {
  id: number; name: string; op: string; node: string; position: number;
  dims: number[]; kind: LayerKind; units: number; pool: string;
}

/** A layer about to be stored (id assigned by the store). */
export type NewLayer = Omit<LayerRow, 'id'>;

/** The probe set's contents a study keeps, so rank/unit/report work without the original folder. */
export interface BoundProbes {
  dir: string; fingerprint: string; name: string; count: number;
  labels: string[];
  labelOffsets: Int32Array;
  labelIds: Int32Array;
  concepts: ConceptRow[] | null;
  examples: ExampleRow[] | null;
  relatedness: { a: string; b: string; similarity: number }[] | null;
}

export interface BoundModel { path: string; fingerprint: string; json: string }

/** Every table that depends on the binding: emptied together when the model or probe set changes. */
const BOUND_TABLES = ['unit_label', 'unit_score', 'score_run', 'relatedness', 'activation', 'chunk_done', 'layer', 'probe_label', 'label', 'concept', 'example', 'run'] as const;

export function readBinding(db: Database.Database): StudyBinding | null {
  const r = db.prepare(`SELECT * FROM run WHERE id = 1`).get() as Record<string, unknown> | undefined;
  if (!r) return null;
  return {
    modelPath: r.model_path as string, modelFp: r.model_fp as string, modelJson: r.model_json as string,
    probesDir: r.probes_dir as string, probesFp: r.probes_fp as string, probesName: r.probes_name as string,
    probeCount: r.probe_count as number, chunkSize: r.chunk_size as number,
    createdAt: r.created_at as string, updatedAt: r.updated_at as string,
  };
}

/** The binding, or a 'study' error telling the user to scan first. */
export function requireBinding(db: Database.Database, file?: string, message = 'This study has no scan yet. Start a scan into it.'): StudyBinding {
  const b = readBinding(db);
  if (!b) throw new SkeinError({ code: 'study', file, message });
  return b;
}

/** The same model and probe set moved on disk: remember where they are now. */
export function updateBindingPaths(db: Database.Database, modelPath: string, probesDir: string): void {
  db.prepare(`UPDATE run SET model_path = ?, probes_dir = ? WHERE id = 1`).run(modelPath, probesDir);
}

/**
 * Binds the study to a model and probe set in one transaction: everything bound to an earlier pair (activations,
 * scores, labels, examples) is discarded first; annotations stay (they are keyed by fingerprints).
 */
export function bindStudy(db: Database.Database, model: BoundModel, probes: BoundProbes, chunkSize: number): void {
  db.transaction(() => {
    for (const t of BOUND_TABLES) db.prepare(`DELETE FROM ${t}`).run();
    // The override belongs to the probe set: a new probe set without one must not inherit the old one's.
    db.prepare(`DELETE FROM meta WHERE key = 'relatedness_override'`).run();
    const t = now();
    db.prepare(`INSERT INTO run (id, model_path, model_fp, model_json, probes_dir, probes_fp, probes_name, probe_count, chunk_size, created_at, updated_at)
                VALUES (1, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
      .run(model.path, model.fingerprint, model.json, probes.dir, probes.fingerprint, probes.name, probes.count, chunkSize, t, t);
    const insLabel = db.prepare(`INSERT INTO label (id, name) VALUES (?, ?)`);
    probes.labels.forEach((name, id) => insLabel.run(id, name));
    const insPL = db.prepare(`INSERT INTO probe_label (probe, label) VALUES (?, ?)`);
    for (let p = 0; p < probes.count; p++) {
      for (let k = probes.labelOffsets[p]; k < probes.labelOffsets[p + 1]; k++) insPL.run(p, probes.labelIds[k]);
    }
    const insC = db.prepare(`INSERT OR REPLACE INTO concept (label, grp, parent, description) VALUES (?, ?, ?, ?)`);
    for (const c of probes.concepts ?? []) insC.run(c.label, c.group, c.parent ?? null, c.description ?? null);
    const insE = db.prepare(`INSERT OR REPLACE INTO example (probe, ext_id, text, image) VALUES (?, ?, ?, ?)`);
    for (const e of probes.examples ?? []) insE.run(e.probe, e.id ?? null, e.text ?? null, e.image ?? null);
    if (probes.relatedness) db.prepare(`INSERT OR REPLACE INTO meta (key, value) VALUES ('relatedness_override', ?)`).run(JSON.stringify(probes.relatedness));
  })();
}

export function readLayers(db: Database.Database): LayerRow[] {
  const rows = db.prepare(`SELECT * FROM layer ORDER BY position, id`).all() as Record<string, unknown>[];
  return rows.map((r) => ({
    id: r.id as number, name: r.name as string, op: r.op as string, node: r.node as string,
    position: r.position as number, dims: JSON.parse(r.dims_json as string), kind: r.kind as LayerKind,
    units: r.units as number, pool: r.pool as string,
  }));
}

export function findLayer(db: Database.Database, name: string, file?: string): LayerRow {
  const layers = readLayers(db);
  const hit = layers.find((l) => l.name === name) ?? layers.find((l) => l.node === name);
  if (!hit) {
    throw new SkeinError({
      code: 'request', file, where: `layer ${name}`,
      message: `No layer "${name}" in this study. Layers: ${layers.map((l) => l.name).join(', ') || '(none scanned yet)'}.`,
    });
  }
  return hit;
}

/** Adds a layer; returns its id. */
export function insertLayer(db: Database.Database, l: NewLayer): number {
  return Number(db.prepare(`INSERT INTO layer (name, op, node, position, dims_json, kind, units, pool) VALUES (?, ?, ?, ?, ?, ?, ?, ?)`)
    .run(l.name, l.op, l.node, l.position, JSON.stringify(l.dims), l.kind, l.units, l.pool).lastInsertRowid);
}

/** Removes a layer with its cached activations and scores (foreign keys cascade). */
export function deleteLayer(db: Database.Database, id: number): void {
  db.prepare(`DELETE FROM layer WHERE id = ?`).run(id);
}

/** Label names; a label's index is its id. */
export function labelNames(db: Database.Database): string[] {
  return db.prepare(`SELECT name FROM label ORDER BY id`).pluck().all() as string[];
}

/** The probe labels in CSR form: ids of probe i are labelIds[labelOffsets[i] .. labelOffsets[i+1]). */
export function readProbeLabels(db: Database.Database, probeCount: number): { labelOffsets: Int32Array; labelIds: Int32Array } {
  const rows = db.prepare(`SELECT probe, label FROM probe_label ORDER BY probe, label`).raw().all() as [number, number][];
  const labelOffsets = new Int32Array(probeCount + 1);
  const labelIds = new Int32Array(rows.length);
  for (const [p] of rows) labelOffsets[p + 1]++;
  for (let i = 0; i < probeCount; i++) labelOffsets[i + 1] += labelOffsets[i];
  rows.forEach(([, l], i) => { labelIds[i] = l; });
  return { labelOffsets, labelIds };
}

/** (probe, label) pairs of the given labels, in no particular order. */
export function probesWithLabels(db: Database.Database, labels: number[]): IterableIterator<[number, number]> {
  if (!labels.length) return [][Symbol.iterator]();
  return db.prepare(`SELECT probe, label FROM probe_label WHERE label IN (${labels.map(() => '?').join(',')})`).raw().iterate(...labels) as IterableIterator<[number, number]>;
}

/** Probes carrying the label. */
export function probeCountOfLabel(db: Database.Database, label: number): number {
  return db.prepare(`SELECT count(*) FROM probe_label WHERE label = ?`).pluck().get(label) as number;
}

/** Label ids of each given probe (in the given order). */
export function labelsOfProbes(db: Database.Database, probes: number[]): number[][] {
  const stmt = db.prepare(`SELECT label FROM probe_label WHERE probe = ? ORDER BY label`).pluck();
  return probes.map((p) => stmt.all(p) as number[]);
}

export function readConcepts(db: Database.Database): ConceptRow[] | null {
  const rows = db.prepare(`SELECT label, grp, parent, description FROM concept`).all() as { label: string; grp: string; parent: string | null; description: string | null }[];
  if (rows.length === 0) return null;
  return rows.map((r) => ({ label: r.label, group: r.grp, parent: r.parent ?? undefined, description: r.description ?? undefined }));
}

/** The probe set's relatedness override rows, or null when it has none. */
export function readRelatednessOverride(db: Database.Database): { a: string; b: string; similarity: number }[] | null {
  const v = db.prepare(`SELECT value FROM meta WHERE key = 'relatedness_override'`).pluck().get() as string | undefined;
  return v ? JSON.parse(v) : null;
}

export interface ExampleInfo { id: string | null; text: string | null; image: string | null }

/** One probe's display data (id, text, image path relative to the probe-set folder), or null when it has none. */
export function readExample(db: Database.Database, probe: number): ExampleInfo | null {
  const e = db.prepare(`SELECT ext_id, text, image FROM example WHERE probe = ?`).get(probe) as { ext_id: string | null; text: string | null; image: string | null } | undefined;
  return e ? { id: e.ext_id, text: e.text, image: e.image } : null;
}
