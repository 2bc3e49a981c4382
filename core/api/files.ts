/**
 * The server-side file browser of browser mode (choose a model, probe set or study by path, confined to
 * ApiContext.allowedRoots) and where the demo lives. Composed into the one API by createApi.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { z } from 'zod';
import { SkeinError } from '../errors.ts';
import { openStudyDb, APP_ID } from '../store/study.ts';
import { isInsideAny, writeDurablyVia } from '../fs/index.ts';
import type { ApiContext } from './context.ts';
import type { fileRequests } from './requests/files.ts';

export interface FileEntry {
  name: string;
  /** Absolute path, usable as-is in any request. */
  path: string;
  kind: 'file' | 'dir';
  /** Bytes for a file, null for a folder. */
  size: number | null;
  /** An .onnx file. */
  isModel: boolean;
  /** A folder holding manifest.json. */
  isProbeSet: boolean;
  /** A SQLite file marked as a Skein study. */
  isStudy: boolean;
}

export interface FolderListing {
  dir: string;
  /** The folder above, or null when this folder is a root (nothing above it may be shown). */
  parent: string | null;
  entries: FileEntry[];
  /** True when the folder held more than MAX_ENTRIES entries and only the first ones are listed. */
  truncated: boolean;
}

export interface DemoPaths { model: string; probes: string; study: string }

/** A folder with 100 000 files must not produce a 100 000-row answer. */
export const MAX_ENTRIES = 5000;

const SQLITE_MAGIC = Buffer.from('SQLite format 3\0', 'latin1');
const STUDY_EXTENSIONS = new Set(['.study', '.db', '.sqlite', '.sqlite3']);

/** The repository's sample-data folder (the demo scenario). */
export const sampleDataDir = (): string => fileURLToPath(new URL('../../sample-data/', import.meta.url)).replace(/[\\/]$/, '');

/** The user's data folder: `$SKEIN_HOME`, else `~/.skein`. */
export function defaultDataDir(env: NodeJS.ProcessEnv = process.env): string {
  return path.resolve(env.SKEIN_HOME || path.join(os.homedir(), '.skein'));
}

/** Reads the 100-byte SQLite header: magic string, then application_id big-endian at offset 68. */
function isStudyFile(file: string, size: number): boolean {
  if (size < 100 || !STUDY_EXTENSIONS.has(path.extname(file).toLowerCase())) return false;
  let fd: number | undefined;
  try {
    fd = fs.openSync(file, 'r');
    const header = Buffer.alloc(100);
    fs.readSync(fd, header, 0, 100, 0);
    return header.subarray(0, 16).equals(SQLITE_MAGIC) && header.readUInt32BE(68) === APP_ID;
  } catch {
    return false;
  } finally {
    if (fd !== undefined) fs.closeSync(fd);
  }
}

function describe(dir: string, name: string): FileEntry | null {
  const full = path.join(dir, name);
  let st: fs.Stats;
  try {
    st = fs.statSync(full); // follows links: a link is shown as what it points at
  } catch {
    return null; // a broken link or a file removed while listing
  }
  if (st.isDirectory()) {
    return { name, path: full, kind: 'dir', size: null, isModel: false, isProbeSet: fs.existsSync(path.join(full, 'manifest.json')), isStudy: false };
  }
  if (!st.isFile()) return null; // sockets, devices, fifos are nothing Skein can open
  return { name, path: full, kind: 'file', size: st.size, isModel: name.toLowerCase().endsWith('.onnx'), isProbeSet: false, isStudy: isStudyFile(full, st.size) };
}

/** What a dropped or command-line path opens as, or null when it is none of the three. */
export function classifyOpenable(file: string): 'model' | 'probes' | 'study' | null {
  const entry = describe(path.dirname(path.resolve(file)), path.basename(file));
  if (!entry) return null;
  return entry.isModel ? 'model' : entry.isProbeSet ? 'probes' : entry.isStudy ? 'study' : null;
}

export function createFileApi(ctx: ApiContext) {
  const dataDir = ctx.dataDir ?? defaultDataDir();
  const roots = (): string[] => ctx.allowedRoots ?? [...new Set([sampleDataDir(), dataDir, os.homedir()])];

  return {
    'app.demo': async (_r: z.infer<(typeof fileRequests)['app.demo']>): Promise<DemoPaths> => {
      const demo = { model: path.join(sampleDataDir(), 'tiles-model.onnx'), probes: path.join(sampleDataDir(), 'tiles'), study: path.join(dataDir, 'demo.study') };
      for (const file of [demo.model, demo.probes]) {
        if (!fs.existsSync(file)) throw new SkeinError({ code: 'io', file, message: 'The demo data has not been built yet. Run `npm run sample-data` in the Skein folder, then try again.' });
      }
      return demo;
    },

    'fs.roots': async (_r: z.infer<(typeof fileRequests)['fs.roots']>): Promise<string[]> => roots().map((r) => path.resolve(r)),

    'fs.list': async (r: z.infer<(typeof fileRequests)['fs.list']>): Promise<FolderListing> => {
      const dir = path.resolve(r.dir);
      const allowed = roots();
      // dispatch already checked r.dir; checked again because entries below are filtered with the same rule.
      if (ctx.allowedRoots && !isInsideAny(dir, allowed)) {
        throw new SkeinError({ code: 'request', file: dir, where: 'dir', message: `This folder is outside the folders Skein may use in browser mode (${allowed.join(', ')}).` });
      }
      let names: string[];
      try {
        names = fs.readdirSync(dir);
      } catch (e) {
        const code = (e as NodeJS.ErrnoException).code;
        const message = code === 'ENOENT' ? 'This folder does not exist. Choose another one.'
          : code === 'ENOTDIR' ? 'This is a file, not a folder.'
          : code === 'EACCES' || code === 'EPERM' ? 'Skein may not read this folder. Check its permissions.'
          : `This folder cannot be read (${code ?? (e as Error).message}).`;
        throw new SkeinError({ code: 'io', file: dir, where: 'dir', message });
      }
      const visible = names.filter((n) => r.hidden || !n.startsWith('.'));
      const entries: FileEntry[] = [];
      let truncated = false;
      for (const name of visible) {
        if (entries.length === MAX_ENTRIES) { truncated = true; break; }
        // A link inside a root that leads outside it is left out, so the listing never offers a path dispatch refuses.
        if (ctx.allowedRoots && !isInsideAny(path.join(dir, name), allowed)) continue;
        const entry = describe(dir, name);
        if (entry) entries.push(entry);
      }
      entries.sort((a, b) => (a.kind === b.kind ? a.name.localeCompare(b.name) : a.kind === 'dir' ? -1 : 1));
      const isRoot = allowed.some((root) => path.resolve(root) === dir);
      const parent = path.dirname(dir);
      const parentAllowed = !isRoot && parent !== dir && (!ctx.allowedRoots || isInsideAny(parent, allowed));
      return { dir, parent: parentAllowed ? parent : null, entries, truncated };
    },

    'study.saveAs': async (r: z.infer<(typeof fileRequests)['study.saveAs']>): Promise<{ file: string }> => {
      const from = path.resolve(r.study);
      const out = path.resolve(r.out);
      if (path.extname(out).toLowerCase() !== '.study') throw new SkeinError({ code: 'request', file: out, where: 'out', message: 'A study file name ends in .study; choose such a name.' });
      if (fs.existsSync(out) && fs.existsSync(from) && fs.realpathSync(out) === fs.realpathSync(from)) {
        throw new SkeinError({ code: 'request', file: out, where: 'out', message: 'This is the study itself; choose another file name to save a copy.' });
      }
      if (fs.existsSync(out) && fs.statSync(out).isDirectory()) throw new SkeinError({ code: 'request', file: out, where: 'out', message: 'This is a folder; choose a file name ending in .study.' });
      const db = openStudyDb(from, { readonly: true, nativeBinding: ctx.nativeBinding });
      // SQLite's online backup copies a consistent snapshot even while a scan writes; the durable write makes it appear whole or not at all.
      try {
        await writeDurablyVia(out, async (tmp) => { await db.backup(tmp); });
      } catch (e) {
        throw new SkeinError({ code: 'io', file: out, message: `The copy could not be written (${(e as Error).message}). Check that the folder exists and is writable.` });
      } finally {
        db.close();
      }
      return { file: out };
    },
  };
}
