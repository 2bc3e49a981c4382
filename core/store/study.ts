import fs from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { migrations, SCHEMA_VERSION } from './schema.ts';

/** Where better-sqlite3's native addon comes from: Node's build by default, Electron's own when given. */
export interface OpenOptions {
  create?: boolean;
  readonly?: boolean;
  nativeBinding?: string;
}

export interface RunRow {
  modelPath: string; modelFp: string; modelJson: string;
  probesDir: string; probesFp: string; probesName: string;
  probeCount: number; chunkSize: number;
  createdAt: string; updatedAt: string;
}

export interface LayerRow {
  id: number; name: string; op: string; node: string; position: number;
  dims: number[]; kind: 'dense' | 'conv' | 'sequence' | 'flat'; units: number; pool: string;
}

export const APP_ID = 0x534b4e31; // "SKN1": marks a SQLite file as a Skein study

/** Opens (and, when asked, creates) a study file, migrating it to the current schema. */
export function openStudyDb(file: string, opts: OpenOptions = {}): Database.Database {
  const abs = path.resolve(file);
  const exists = fs.existsSync(abs);
  if (!exists && !opts.create) {
    throw new SkeinError({ code: 'study', file: abs, message: 'No study file here. Run a scan first (skein scan <model> <probes> --study FILE) or check the path.' });
  }
  if (exists && fs.statSync(abs).isDirectory()) {
    throw new SkeinError({ code: 'study', file: abs, message: 'This is a folder, not a study file. Give a file name such as my.study.' });
  }
  if (!exists) fs.mkdirSync(path.dirname(abs), { recursive: true });
  let db: Database.Database;
  try {
    db = new Database(abs, { readonly: opts.readonly ?? false, nativeBinding: opts.nativeBinding, timeout: 5000 });
  } catch (e) {
    throw new SkeinError({ code: 'study', file: abs, message: `Cannot open the study file (${(e as Error).message}). Check permissions or choose another file.` });
  }
  try {
    // Reading the header is what fails for a file that is not SQLite at all.
    const appId = db.pragma('application_id', { simple: true }) as number;
    const version = db.pragma('user_version', { simple: true }) as number;
    const tables = (db.prepare(`SELECT count(*) AS n FROM sqlite_master`).get() as { n: number }).n;
    if (exists && tables > 0 && appId !== APP_ID) {
      throw new SkeinError({ code: 'study', file: abs, message: 'This SQLite file is not a Skein study. Choose a study file or a new file name.' });
    }
    if (version > SCHEMA_VERSION) {
      throw new SkeinError({ code: 'study', file: abs, where: `schema version ${version}`, message: `This study was written by a newer Skein (schema ${version}, this one knows up to ${SCHEMA_VERSION}). Update Skein to open it.` });
    }
    if (!opts.readonly) {
      db.pragma('journal_mode = WAL');
      // FULL: an acknowledged commit survives a crash of the process and of the machine.
      db.pragma('synchronous = FULL');
      db.pragma('foreign_keys = ON');
      migrate(db, version);
    } else if (version < SCHEMA_VERSION) {
      throw new SkeinError({ code: 'study', file: abs, message: 'This study needs an upgrade; open it once without read-only mode.' });
    }
    return db;
  } catch (e) {
    db.close();
    if (e instanceof SkeinError) throw e;
    throw new SkeinError({ code: 'study', file: abs, message: `Not a readable study file (${(e as Error).message}). Choose a study file or a new file name.` });
  }
}

/** Opens a study for one piece of work and always closes it, whatever the work throws. */
export function withStudyDb<T>(file: string, opts: OpenOptions, fn: (db: Database.Database) => T): T {
  const db = openStudyDb(file, opts);
  try {
    return fn(db);
  } finally {
    db.close();
  }
}

function migrate(db: Database.Database, from: number): void {
  for (let v = from; v < SCHEMA_VERSION; v++) {
    db.transaction(() => {
      db.exec(migrations[v]);
      db.pragma(`user_version = ${v + 1}`);
      db.pragma(`application_id = ${APP_ID}`);
    })();
  }
}

export function now(): string {
  return new Date().toISOString();
}

export function readRun(db: Database.Database): RunRow | null {
  const r = db.prepare(`SELECT * FROM run WHERE id = 1`).get() as Record<string, unknown> | undefined;
  if (!r) return null;
  return {
    modelPath: r.model_path as string, modelFp: r.model_fp as string, modelJson: r.model_json as string,
    probesDir: r.probes_dir as string, probesFp: r.probes_fp as string, probesName: r.probes_name as string,
    probeCount: r.probe_count as number, chunkSize: r.chunk_size as number,
    createdAt: r.created_at as string, updatedAt: r.updated_at as string,
  };
}

export function readLayers(db: Database.Database): LayerRow[] {
  const rows = db.prepare(`SELECT * FROM layer ORDER BY position, id`).all() as Record<string, unknown>[];
  return rows.map((r) => ({
    id: r.id as number, name: r.name as string, op: r.op as string, node: r.node as string,
    position: r.position as number, dims: JSON.parse(r.dims_json as string), kind: r.kind as LayerRow['kind'],
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

/** Chunks already committed for a layer. */
export function doneChunks(db: Database.Database, layerId: number): Set<number> {
  const rows = db.prepare(`SELECT chunk FROM chunk_done WHERE layer_id = ?`).pluck().all(layerId) as number[];
  return new Set(rows);
}

export function floatsToBlob(a: Float32Array): Buffer {
  return Buffer.from(a.buffer, a.byteOffset, a.byteLength);
}

export function blobToFloats(b: Buffer): Float32Array {
  // Copy: SQLite's buffer may not be 4-byte aligned.
  const out = new Float32Array(b.byteLength / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}

export function blobToUint32(b: Buffer): Uint32Array {
  const out = new Uint32Array(b.byteLength / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}

export function blobToInt32(b: Buffer): Int32Array {
  const out = new Int32Array(b.byteLength / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}

/** Reads one unit's activations over all probes (probe order) into `out` (length N), chunk by chunk. */
export function readUnit(db: Database.Database, run: RunRow, layerId: number, unit: number, out?: Float32Array): Float32Array {
  const n = run.probeCount;
  const values = out ?? new Float32Array(n);
  const rows = db.prepare(`SELECT chunk, vals FROM activation WHERE layer_id = ? AND unit = ? ORDER BY chunk`).raw().iterate(layerId, unit) as IterableIterator<[number, Buffer]>;
  let seen = 0;
  for (const [chunk, vals] of rows) {
    const start = chunk * run.chunkSize;
    const bytes = new Uint8Array(values.buffer, values.byteOffset + start * 4, vals.byteLength);
    bytes.set(vals);
    seen += vals.byteLength / 4;
  }
  if (seen !== n) {
    throw new SkeinError({ code: 'study', where: `layer ${layerId} unit ${unit}`, message: `The scan of this layer is incomplete (${seen} of ${n} probes). Rerun the scan to finish it.` });
  }
  return values;
}

/** Every unit's values for one chunk of probes, in unit order (the probe-major export reads a layer this way). */
export function readLayerChunk(db: Database.Database, layerId: number, chunk: number): Float32Array[] {
  return (db.prepare(`SELECT vals FROM activation WHERE layer_id = ? AND chunk = ? ORDER BY unit`).pluck().all(layerId, chunk) as Buffer[]).map(blobToFloats);
}

/** Argmax locations of one unit (conv/sequence layers), or null when the layer keeps none. */
export function readUnitArgmax(db: Database.Database, run: RunRow, layerId: number, unit: number, probes: number[]): (number | null)[] {
  const stmt = db.prepare(`SELECT argmax FROM activation WHERE layer_id = ? AND unit = ? AND chunk = ?`).pluck();
  const cache = new Map<number, Uint32Array | null>();
  return probes.map((p) => {
    const chunk = Math.floor(p / run.chunkSize);
    if (!cache.has(chunk)) {
      const b = stmt.get(layerId, unit, chunk) as Buffer | null | undefined;
      cache.set(chunk, b ? blobToUint32(b) : null);
    }
    const a = cache.get(chunk);
    return a ? a[p - chunk * run.chunkSize] : null;
  });
}
