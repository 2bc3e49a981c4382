/**
 * The activations repository: one row per (layer, unit, chunk) of float32 values in probe order (stored in the
 * smaller lossless layout of core/store/codec.ts, named by `enc`), with the argmax locations of conv and sequence units, and `chunk_done`, the record of which chunks are complete. The only code that
 * reads or writes those tables. Layout and its costs: core/store/schema.ts.
 */
import type Database from 'better-sqlite3';
import { crc32 } from 'node:zlib';
import { SkeinError } from '../errors.ts';
import { blobToUint32, now } from './study.ts';
import { decodeFloats, decodeFloatsInto, encodeFloats } from './codec.ts';
import type { StudyBinding } from './binding.ts';

/** Chunks already committed for a layer. */
export function doneChunks(db: Database.Database, layerId: number): Set<number> {
  const rows = db.prepare(`SELECT chunk FROM chunk_done WHERE layer_id = ?`).pluck().all(layerId) as number[];
  return new Set(rows);
}

/** One layer's values for one chunk, unit-major: unit u's values are values[u*length .. (u+1)*length). */
export interface ChunkBlock {
  layerId: number;
  units: number;
  values: Float32Array;
  argmax: Uint32Array | null;
}

/**
 * Commits one chunk of every given layer, with its chunk_done rows, in one transaction: a killed scan leaves whole
 * chunks only, so a resume never mixes partial work in.
 */
export function writeChunk(db: Database.Database, chunk: number, length: number, blocks: ChunkBlock[]): void {
  const insertAct = db.prepare(`INSERT OR REPLACE INTO activation (layer_id, unit, chunk, vals, enc, argmax, crc) VALUES (?, ?, ?, ?, ?, ?, ?)`);
  const insertDone = db.prepare(`INSERT OR REPLACE INTO chunk_done (layer_id, chunk) VALUES (?, ?)`);
  const touch = db.prepare(`UPDATE run SET updated_at = ? WHERE id = 1`);
  // Activations are a cache a rerun recomputes: their commits skip the fsync (WAL + NORMAL still never corrupts; a
  // power cut may drop the last chunks, which resume redoes). Everything else on the connection stays FULL.
  const previous = db.pragma('synchronous', { simple: true }) as number;
  db.pragma('synchronous = NORMAL');
  try {
    writeChunkRows(db, insertAct, insertDone, touch, chunk, length, blocks);
  } finally {
    db.pragma(`synchronous = ${previous}`);
  }
}

function writeChunkRows(db: Database.Database, insertAct: Database.Statement, insertDone: Database.Statement, touch: Database.Statement, chunk: number, length: number, blocks: ChunkBlock[]): void {
  db.transaction(() => {
    for (const b of blocks) {
      for (let u = 0; u < b.units; u++) {
        const vals = b.values.subarray(u * length, (u + 1) * length);
        const am = b.argmax ? b.argmax.subarray(u * length, (u + 1) * length) : null;
        const e = encodeFloats(vals);
        insertAct.run(b.layerId, u, chunk, e.blob, e.enc, am ? Buffer.from(am.buffer, am.byteOffset, am.byteLength) : null, crc32(e.blob));
      }
      insertDone.run(b.layerId, chunk);
    }
    touch.run(now());
  })();
}

/**
 * Writes one unit's values over all probes as its chunk rows (fixtures that build a study unit by unit, without a
 * scan). Call markChunksDone once every unit of the layer is written.
 */
export function writeUnitChunks(db: Database.Database, layerId: number, unit: number, chunkSize: number, values: Float32Array): void {
  const ins = db.prepare(`INSERT OR REPLACE INTO activation (layer_id, unit, chunk, vals, enc, argmax, crc) VALUES (?, ?, ?, ?, ?, NULL, ?)`);
  for (let c = 0; c * chunkSize < values.length; c++) {
    const e = encodeFloats(values.subarray(c * chunkSize, Math.min(values.length, (c + 1) * chunkSize)));
    ins.run(layerId, unit, c, e.blob, e.enc, crc32(e.blob));
  }
}

/** Records chunks of a layer as complete. */
export function markChunksDone(db: Database.Database, layerId: number, chunks: number[]): void {
  const ins = db.prepare(`INSERT OR REPLACE INTO chunk_done (layer_id, chunk) VALUES (?, ?)`);
  db.transaction(() => { for (const c of chunks) ins.run(layerId, c); })();
}

function layerName(db: Database.Database, layerId: number): string {
  return (db.prepare(`SELECT name FROM layer WHERE id = ?`).pluck().get(layerId) as string | undefined) ?? String(layerId);
}

/** The blob as stored, once its CRC-32 matches what the scan wrote (rows from before migration 9 carry none). */
function verified(db: Database.Database, layerId: number, unit: number, chunk: number, vals: Buffer, crc: number | null): Buffer {
  if (crc !== null && crc32(vals) !== crc) {
    throw new SkeinError({
      code: 'study', file: db.name, where: `layer ${layerName(db, layerId)}, unit ${unit}, chunk ${chunk}`,
      message: 'The cached activations here are damaged: they no longer match the checksum the scan wrote (the file was altered, or its disk failed). Scan the model again into a new study file, and carry the reviews over with skein review export / import.',
    });
  }
  return vals;
}

/** Reads one unit's activations over all probes (probe order) into `out` (length N), chunk by chunk. */
export function readUnit(db: Database.Database, binding: StudyBinding, layerId: number, unit: number, out?: Float32Array): Float32Array {
  const n = binding.probeCount;
  const values = out ?? new Float32Array(n);
  const rows = db.prepare(`SELECT chunk, vals, enc, crc FROM activation WHERE layer_id = ? AND unit = ? ORDER BY chunk`).raw().iterate(layerId, unit) as IterableIterator<[number, Buffer, number, number | null]>;
  let seen = 0;
  for (const [chunk, vals, enc, crc] of rows) seen += decodeFloatsInto(enc, verified(db, layerId, unit, chunk, vals, crc), values, chunk * binding.chunkSize);
  if (seen !== n) {
    throw new SkeinError({ code: 'study', where: `layer ${layerId} unit ${unit}`, message: `The scan of this layer is incomplete (${seen} of ${n} probes). Rerun the scan to finish it.` });
  }
  return values;
}

/** Every unit's values for one chunk of probes, in unit order (the probe-major export reads a layer this way). */
export function readLayerChunk(db: Database.Database, layerId: number, chunk: number): Float32Array[] {
  return (db.prepare(`SELECT unit, vals, enc, crc FROM activation WHERE layer_id = ? AND chunk = ? ORDER BY unit`).raw().all(layerId, chunk) as [number, Buffer, number, number | null][])
    .map(([unit, vals, enc, crc]) => decodeFloats(enc, verified(db, layerId, unit, chunk, vals, crc)));
}

/**
 * The given chunks of a layer (or of one unit of it), unit by unit: yields each unit's chunks in ascending chunk
 * order as they come, so a caller holds one unit's sample at a time.
 */
export function* readChunkSample(db: Database.Database, layerId: number, chunks: number[], unit?: number): Generator<{ unit: number; chunk: number; values: Float32Array }> {
  const placeholders = chunks.map(() => '?').join(',');
  const rows = unit === undefined
    ? db.prepare(`SELECT unit, chunk, vals, enc, crc FROM activation WHERE layer_id = ? AND chunk IN (${placeholders}) ORDER BY unit, chunk`).raw().iterate(layerId, ...chunks)
    : db.prepare(`SELECT unit, chunk, vals, enc, crc FROM activation WHERE layer_id = ? AND unit = ? AND chunk IN (${placeholders}) ORDER BY chunk`).raw().iterate(layerId, unit, ...chunks);
  for (const [u, c, vals, enc, crc] of rows as IterableIterator<[number, number, Buffer, number, number | null]>) yield { unit: u, chunk: c, values: decodeFloats(enc, verified(db, layerId, u, c, vals, crc)) };
}

/** Argmax locations of one unit (conv/sequence layers), or null when the layer keeps none. */
export function readUnitArgmax(db: Database.Database, binding: StudyBinding, layerId: number, unit: number, probes: number[]): (number | null)[] {
  const stmt = db.prepare(`SELECT argmax FROM activation WHERE layer_id = ? AND unit = ? AND chunk = ?`).pluck();
  const cache = new Map<number, Uint32Array | null>();
  return probes.map((p) => {
    const chunk = Math.floor(p / binding.chunkSize);
    if (!cache.has(chunk)) {
      const b = stmt.get(layerId, unit, chunk) as Buffer | null | undefined;
      cache.set(chunk, b ? blobToUint32(b) : null);
    }
    const a = cache.get(chunk);
    return a ? a[p - chunk * binding.chunkSize] : null;
  });
}
