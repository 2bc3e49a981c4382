/**
 * File safety, one rule each, used by every module that checks a path or replaces a file.
 *
 * Containment: a path lies inside a folder when, after resolving symbolic links of the longest existing prefix of
 * both, it is that folder or below it. Links are resolved so a link inside a folder cannot lead out of it; the
 * longest existing prefix is used so a file about to be created is judged by the folder it will land in. Callers
 * that need a file (not the folder itself) check that separately.
 *
 * Durable write: data goes to a temporary file beside the target, the file is fsynced, renamed over the target, and
 * the folder is fsynced. A crash at any point leaves the old file or the new one, never half of one, and once the
 * call returns the new file survives a power loss. Chosen for every writer (exports, bundles, reports, preferences,
 * shell state, arrays): they are small or written once, so the two fsyncs cost little next to losing a user's file.
 */
import fs from 'node:fs';
import path from 'node:path';
import crypto from 'node:crypto';
import { SkeinError } from '../errors.ts';

/** The path with symbolic links of its longest existing prefix resolved; the missing tail is kept as written. */
export function resolveLinks(p: string): string {
  let cur = path.resolve(p);
  const tail: string[] = [];
  while (!fs.existsSync(cur)) {
    const parent = path.dirname(cur);
    if (parent === cur) break;
    tail.unshift(path.basename(cur));
    cur = parent;
  }
  let real: string;
  try {
    real = fs.realpathSync(cur);
  } catch {
    real = cur;
  }
  return path.join(real, ...tail);
}

/** True when `target` is `folder` or lies below it, links resolved (the one containment rule). */
export function isInside(folder: string, target: string): boolean {
  const rel = path.relative(resolveLinks(folder), resolveLinks(target));
  return rel === '' || (rel !== '..' && !rel.startsWith(`..${path.sep}`) && !path.isAbsolute(rel));
}

/** True when `target` lies inside any of `folders`. */
export function isInsideAny(target: string, folders: readonly string[]): boolean {
  return folders.some((f) => isInside(f, target));
}

/** A fresh temporary name in the target's folder (same file system, so the final rename is atomic). */
function tempNameFor(abs: string): string {
  return path.join(path.dirname(abs), `.${path.basename(abs)}.${crypto.randomBytes(6).toString('hex')}.tmp`);
}

function syncFolder(dir: string): void {
  let fd: number | null = null;
  try {
    fd = fs.openSync(dir, 'r');
    fs.fsyncSync(fd);
  } catch {
    // Some platforms (Windows) cannot open or sync a folder; the rename is still atomic there.
  } finally {
    if (fd !== null) fs.closeSync(fd);
  }
}

function ioError(abs: string, e: unknown): SkeinError {
  if (e instanceof SkeinError) return e;
  const why = (e as NodeJS.ErrnoException).code ?? (e as Error).message;
  return new SkeinError({ code: 'io', file: abs, message: `Could not write this file (${why}). Check the folder exists, you may write there and the disk has free space.` });
}

/**
 * Writes a file durably through `fill`, which writes the content to an open file descriptor. Errors that are not
 * SkeinErrors (or RangeErrors the caller throws to say its data is wrong) become an 'io' SkeinError naming the file.
 */
export function writeDurably(file: string, fill: (fd: number) => void): void {
  const abs = path.resolve(file);
  const dir = path.dirname(abs);
  const tmp = tempNameFor(abs);
  try {
    fs.mkdirSync(dir, { recursive: true });
    const fd = fs.openSync(tmp, 'w', 0o644);
    try {
      fill(fd);
      fs.fsyncSync(fd);
    } finally {
      fs.closeSync(fd);
    }
    fs.renameSync(tmp, abs);
    syncFolder(dir);
  } catch (e) {
    fs.rmSync(tmp, { force: true });
    if (e instanceof RangeError) throw e;
    throw ioError(abs, e);
  }
}

/** Writes a whole string or byte array durably. */
export function writeFileDurably(file: string, data: string | Uint8Array): void {
  writeDurably(file, (fd) => fs.writeFileSync(fd, data));
}

/**
 * The same durable replacement for content another library writes to a path (SQLite's online backup): `produce`
 * writes the temporary path, which is then fsynced, renamed over `file`, and the folder fsynced.
 */
export async function writeDurablyVia(file: string, produce: (tmpPath: string) => Promise<void>): Promise<void> {
  const abs = path.resolve(file);
  const dir = path.dirname(abs);
  const tmp = tempNameFor(abs);
  try {
    fs.mkdirSync(dir, { recursive: true });
    await produce(tmp);
    const fd = fs.openSync(tmp, 'r+');
    try {
      fs.fsyncSync(fd);
    } finally {
      fs.closeSync(fd);
    }
    fs.renameSync(tmp, abs);
    syncFolder(dir);
  } catch (e) {
    fs.rmSync(tmp, { force: true });
    throw ioError(abs, e);
  }
}
