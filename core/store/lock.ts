/**
 * One writer per study. A job that writes a study (scan, scoring, lens, removal cost) holds `<study>.lock`, a file
 * created exclusively (O_EXCL) holding the holder's pid, host, job and start time, removed when the job ends. A lock
 * whose process is gone (killed, crashed) is stale: the next job takes it over, so a lock dies with its process.
 * Readers never lock: SQLite's WAL lets them read while one job writes.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { SkeinError } from '../errors.ts';

export interface LockHolder { pid: number; host: string; job: string; started: string }

export interface StudyLock { file: string; release(): void }

export function lockPathOf(study: string): string {
  return path.resolve(study) + '.lock';
}

/** Takes the study's writer lock for `job`, or refuses naming the job that holds it. */
export function lockStudy(study: string, job: string): StudyLock {
  const file = lockPathOf(study);
  const me: LockHolder = { pid: process.pid, host: os.hostname(), job, started: new Date().toISOString() };
  fs.mkdirSync(path.dirname(file), { recursive: true });
  for (let attempt = 0; attempt < 3; attempt++) {
    try {
      const fd = fs.openSync(file, 'wx');
      try {
        fs.writeSync(fd, JSON.stringify(me));
        fs.fsyncSync(fd);
      } finally {
        fs.closeSync(fd);
      }
      let released = false;
      return {
        file,
        release() {
          if (released) return;
          released = true;
          // Only remove our own lock: never one another job took over.
          const now = readHolder(file);
          if (now && now.pid === me.pid && now.started === me.started && now.job === me.job) fs.rmSync(file, { force: true });
        },
      };
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code !== 'EEXIST') {
        throw new SkeinError({ code: 'io', file, message: `Cannot create the study's lock file (${(e as Error).message}). Check that the folder is writable.` });
      }
    }
    const holder = readHolder(file);
    if (holder === undefined) continue; // removed meanwhile: try again
    if (holder && isAlive(holder)) {
      const who = holder.pid === process.pid ? 'in this session' : `by process ${holder.pid}`;
      throw new SkeinError({
        code: 'study', file: path.resolve(study), where: 'lock',
        message: `Another job is writing this study: a ${holder.job} started ${holder.started} ${who}. Wait for it to finish or cancel it, then try again. (If no Skein job is running, delete ${file}.)`,
      });
    }
    if (holder === null && Date.now() - mtimeMs(file) < 5000) {
      // Just created by another job that has not written its name yet.
      throw new SkeinError({ code: 'study', file: path.resolve(study), where: 'lock', message: `Another job is starting on this study. Wait for it to finish, then try again.` });
    }
    breakStale(file, holder);
  }
  throw new SkeinError({ code: 'study', file: path.resolve(study), where: 'lock', message: 'Another job keeps taking this study\'s lock. Wait for it to finish, then try again.' });
}

/** Runs `fn` holding the study's writer lock; releases it however `fn` ends. */
export async function withStudyLock<T>(study: string, job: string, fn: () => Promise<T>): Promise<T> {
  const lock = lockStudy(study, job);
  try {
    return await fn();
  } finally {
    lock.release();
  }
}

/** The holder, null when the file is unreadable or half-written, undefined when it is gone. */
function readHolder(file: string): LockHolder | null | undefined {
  let text: string;
  try {
    text = fs.readFileSync(file, 'utf8');
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return undefined;
    return null;
  }
  try {
    const h = JSON.parse(text) as LockHolder;
    return typeof h.pid === 'number' && typeof h.job === 'string' ? h : null;
  } catch {
    return null;
  }
}

function mtimeMs(file: string): number {
  try {
    return fs.statSync(file).mtimeMs;
  } catch {
    return 0;
  }
}

/** A holder on another host cannot be checked: treat it as alive (the message says how to clear it). */
function isAlive(h: LockHolder): boolean {
  if (h.host !== os.hostname()) return true;
  try {
    process.kill(h.pid, 0);
    return true;
  } catch (e) {
    return (e as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/** Moves a stale lock aside; if another job replaced it meanwhile, puts that one back. */
function breakStale(file: string, seen: LockHolder | null): void {
  const aside = `${file}.stale-${process.pid}-${Date.now()}`;
  try {
    fs.renameSync(file, aside);
  } catch {
    return; // gone already
  }
  const moved = readHolder(aside);
  if (JSON.stringify(moved) !== JSON.stringify(seen)) {
    try {
      fs.linkSync(aside, file);
    } catch { /* a newer lock is in place: it wins */ }
  }
  fs.rmSync(aside, { force: true });
}
