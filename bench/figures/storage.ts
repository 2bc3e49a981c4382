/**
 * Storage: the study's activation write path (core/extract/scan.ts: one row per layer × unit × chunk, one
 * transaction per chunk, the study's WAL + synchronous=FULL) against raw sequential inserts of the same bytes.
 */
import fs from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import { openStudyDb, floatsToBlob, now } from '../../core/store/study.ts';
import { median, timed } from '../lib/measure.ts';
import { uniform } from '../lib/random.ts';

export interface StorageFigure {
  units: number;
  probes: number;
  chunkSize: number;
  bytes: number;
  studySeconds: number[];
  rawSeconds: number[];
  rawChunkedSeconds: number[];
  /** The study write path with synchronous=NORMAL instead of FULL (a proposal). */
  normalSeconds: number[];
  normalMbPerSecond: number;
  studyMbPerSecond: number;
  rawMbPerSecond: number;
  rawChunkedMbPerSecond: number;
  ratio: number;
  studyFileBytes: number;
  rawFileBytes: number;
  studyMbPerMillion: number;
  rawMbPerMillion: number;
}

function removeDb(file: string): void {
  for (const f of [file, `${file}-wal`, `${file}-shm`, `${file}-journal`]) fs.rmSync(f, { force: true });
}

function fileBytes(file: string): number {
  return [file, `${file}-wal`].reduce((s, f) => s + (fs.existsSync(f) ? fs.statSync(f).size : 0), 0);
}

/** One chunk's worth of per-unit blobs: the same bytes go to every writer. */
function chunkValues(units: number, length: number, seed: number): Float32Array {
  return uniform(units * length, 0, 4, seed);
}

/** The statements and transaction shape of the scan's chunk commit, on a study opened by core/store. */
function writeLikeScan(file: string, units: number, probes: number, chunkSize: number, chunks: Float32Array[], synchronous: 'FULL' | 'NORMAL' = 'FULL'): void {
  const db = openStudyDb(file, { create: true });
  try {
    // the proposal variant: in WAL mode NORMAL still never corrupts; a power cut can lose the last commits (the scan redoes those chunks)
    if (synchronous !== 'FULL') db.pragma(`synchronous = ${synchronous}`);
    db.prepare(`INSERT INTO run (id, model_path, model_fp, model_json, probes_dir, probes_fp, probes_name, probe_count, chunk_size, created_at, updated_at)
      VALUES (1, 'bench.onnx', 'bench', '{}', 'bench', 'bench', 'bench', ?, ?, ?, ?)`).run(probes, chunkSize, now(), now());
    db.prepare(`INSERT INTO layer (id, name, op, node, position, dims_json, kind, units, pool) VALUES (1, 'bench', 'Relu', 'bench', 0, ?, 'dense', ?, 'none')`)
      .run(JSON.stringify([units]), units);
    const insertAct = db.prepare(`INSERT OR REPLACE INTO activation (layer_id, unit, chunk, vals, argmax) VALUES (?, ?, ?, ?, ?)`);
    const insertDone = db.prepare(`INSERT OR REPLACE INTO chunk_done (layer_id, chunk) VALUES (?, ?)`);
    const touch = db.prepare(`UPDATE run SET updated_at = ? WHERE id = 1`);
    chunks.forEach((values, chunk) => {
      const length = values.length / units;
      db.transaction(() => {
        for (let u = 0; u < units; u++) insertAct.run(1, u, chunk, floatsToBlob(values.subarray(u * length, (u + 1) * length)), null);
        insertDone.run(1, chunk);
        touch.run(now());
      })();
    });
  } finally {
    db.close();
  }
}

/** Raw: a rowid table of blobs, appended in one transaction (SQLite's defaults: rollback journal, synchronous=FULL). */
function writeRaw(file: string, units: number, chunks: Float32Array[]): void {
  const db = new Database(file);
  try {
    db.exec(`CREATE TABLE raw (vals BLOB NOT NULL)`);
    const insert = db.prepare(`INSERT INTO raw (vals) VALUES (?)`);
    db.transaction(() => {
      for (const values of chunks) {
        const length = values.length / units;
        for (let u = 0; u < units; u++) insert.run(floatsToBlob(values.subarray(u * length, (u + 1) * length)));
      }
    })();
  } finally {
    db.close();
  }
}

/** Raw with the study's durability: same rowid table, but WAL + synchronous=FULL and one commit per chunk. */
function writeRawChunked(file: string, units: number, chunks: Float32Array[]): void {
  const db = new Database(file);
  try {
    db.pragma('journal_mode = WAL');
    db.pragma('synchronous = FULL');
    db.exec(`CREATE TABLE raw (vals BLOB NOT NULL)`);
    const insert = db.prepare(`INSERT INTO raw (vals) VALUES (?)`);
    for (const values of chunks) {
      const length = values.length / units;
      db.transaction(() => {
        for (let u = 0; u < units; u++) insert.run(floatsToBlob(values.subarray(u * length, (u + 1) * length)));
      })();
    }
  } finally {
    db.close();
  }
}

export async function storageFigure(outDir: string, units: number, probes: number, reps: number, log: (s: string) => void, chunkSize = 1024): Promise<StorageFigure> {
  fs.mkdirSync(outDir, { recursive: true });
  const chunks: Float32Array[] = [];
  for (let start = 0, c = 0; start < probes; start += chunkSize, c++) chunks.push(chunkValues(units, Math.min(chunkSize, probes - start), 100 + c));
  const bytes = units * probes * 4;
  const studyFile = path.join(outDir, 'write.study');
  const rawFile = path.join(outDir, 'raw.sqlite');
  const rawChunkedFile = path.join(outDir, 'raw-chunked.sqlite');
  const normalFile = path.join(outDir, 'write-normal.study');
  const normalSeconds: number[] = [];
  const studySeconds: number[] = [];
  const rawSeconds: number[] = [];
  const rawChunkedSeconds: number[] = [];
  let studyFileBytes = 0;
  let rawFileBytes = 0;
  for (let rep = 0; rep < reps; rep++) {
    for (const f of [studyFile, rawFile, rawChunkedFile, normalFile]) removeDb(f);
    rawSeconds.push((await timed(() => writeRaw(rawFile, units, chunks))).seconds);
    studySeconds.push((await timed(() => writeLikeScan(studyFile, units, probes, chunkSize, chunks))).seconds);
    rawChunkedSeconds.push((await timed(() => writeRawChunked(rawChunkedFile, units, chunks))).seconds);
    normalSeconds.push((await timed(() => writeLikeScan(normalFile, units, probes, chunkSize, chunks, 'NORMAL'))).seconds);
    studyFileBytes = fileBytes(studyFile);
    rawFileBytes = fileBytes(rawFile);
    log(`  storage rep ${rep + 1}/${reps}: raw ${rawSeconds[rep].toFixed(2)} s, raw with study durability ${rawChunkedSeconds[rep].toFixed(2)} s, study ${studySeconds[rep].toFixed(2)} s, study with synchronous=NORMAL ${normalSeconds[rep].toFixed(2)} s`);
  }
  for (const f of [studyFile, rawFile, rawChunkedFile, normalFile]) removeDb(f);
  const mb = bytes / 1e6;
  const millions = (units * probes) / 1e6;
  const studyMbPerSecond = mb / median(studySeconds);
  const rawMbPerSecond = mb / median(rawSeconds);
  return {
    units, probes, chunkSize, bytes, studySeconds, rawSeconds, rawChunkedSeconds, normalSeconds, normalMbPerSecond: mb / median(normalSeconds),
    studyMbPerSecond, rawMbPerSecond, rawChunkedMbPerSecond: mb / median(rawChunkedSeconds),
    ratio: studyMbPerSecond / rawMbPerSecond, studyFileBytes, rawFileBytes,
    studyMbPerMillion: studyFileBytes / 1e6 / millions, rawMbPerMillion: rawFileBytes / 1e6 / millions,
  };
}
