/**
 * Opening a study file (one SQLite database, WAL, synchronous=FULL), migrating it, and the blob codec the
 * repositories share. The repositories, one per group of tables: binding.ts (what the study is bound to, layers,
 * labels, examples), activations.ts, scores.ts, annotations.ts. Schema and migrations: schema.ts.
 */
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
  /** Fixture builds only (tests, benchmarks): commits are not synced to disk. Never for a user's study. */
  unsynced?: boolean;
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
    if (exists && tables === 0 && !opts.create) {
      // A read never turns a file into a study (an empty or zero-byte file stays as it is).
      throw new SkeinError({ code: 'study', file: abs, message: 'This file is empty, not a study. Run a scan into it first (skein scan <model> <probes> --study FILE) or choose a study file.' });
    }
    if (exists && tables > 0 && appId !== APP_ID) {
      throw new SkeinError({ code: 'study', file: abs, message: 'This SQLite file is not a Skein study. Choose a study file or a new file name.' });
    }
    if (version > SCHEMA_VERSION) {
      throw new SkeinError({ code: 'study', file: abs, where: `schema version ${version}`, message: `This study was written by a newer Skein (schema ${version}, this one knows up to ${SCHEMA_VERSION}). Update Skein to open it.` });
    }
    if (!opts.readonly) {
      db.pragma('journal_mode = WAL');
      // FULL: an acknowledged commit survives a crash of the process and of the machine.
      db.pragma(opts.unsynced ? 'synchronous = OFF' : 'synchronous = FULL');
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

/** Folds the write-ahead log into the main file and empties it (a fixture is then one self-contained file). */
export function checkpoint(db: Database.Database): void {
  db.pragma('wal_checkpoint(TRUNCATE)');
}

/** The version of the SQLite library better-sqlite3 carries (reported with benchmark figures). */
export function sqliteVersion(db: Database.Database): string {
  return db.prepare('select sqlite_version()').pluck().get() as string;
}

/** Runs `fn` in one transaction: repository calls inside it commit together or not at all. */
export function inTransaction<T>(db: Database.Database, fn: () => T): T {
  return db.transaction(fn)();
}

export function now(): string {
  return new Date().toISOString();
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

/** The connection's synchronous level (0 OFF, 1 NORMAL, 2 FULL): what an acknowledged commit survives. */
export function syncLevel(db: Database.Database): number {
  return db.pragma('synchronous', { simple: true }) as number;
}
