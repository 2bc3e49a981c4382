/** Writing review files so that a crash leaves the old file or the new one, never half of one. */
import fs from 'node:fs';
import path from 'node:path';
import crypto from 'node:crypto';
import { SkeinError } from '../errors.ts';

/** Writes via a synced temporary file in the same folder and a rename, then syncs the folder. */
export function writeFileDurably(file: string, data: string | Uint8Array): void {
  const abs = path.resolve(file);
  const dir = path.dirname(abs);
  const tmp = path.join(dir, `.${path.basename(abs)}.${crypto.randomBytes(6).toString('hex')}.tmp`);
  try {
    fs.mkdirSync(dir, { recursive: true });
    const fd = fs.openSync(tmp, 'w', 0o644);
    try {
      fs.writeFileSync(fd, data);
      fs.fsyncSync(fd);
    } finally {
      fs.closeSync(fd);
    }
    fs.renameSync(tmp, abs);
    syncFolder(dir);
  } catch (e) {
    fs.rmSync(tmp, { force: true });
    throw new SkeinError({ code: 'io', file: abs, message: `Could not write this file (${(e as Error).message}). Check the folder exists and you may write there.` });
  }
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
