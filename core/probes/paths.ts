/** Files a probe set names must stay inside its folder, even through ".." or symbolic links. */
import fs from 'node:fs';
import path from 'node:path';
import { isInside } from '../fs/index.ts';
import { probesError } from './fail.ts';

export interface FolderRoot {
  /** The folder as the user gave it, made absolute: used in messages and for reading. */
  dir: string;
  /** fs.realpathSync(dir): canonical names are relative to it. */
  real: string;
}

export interface ResolvedFile {
  /** Absolute path under root.dir, as the user spelled it. */
  file: string;
  /** Canonical name relative to the real folder, with "/" separators (used in the fingerprint). */
  canonical: string;
}

/**
 * Resolve `rel` against the probe-set folder. Errors go to `at.file` / `at.where` (the manifest field or CSV line
 * that names the file); `what` describes the file in the message, e.g. 'image' or 'labels file'.
 */
export function resolveInside(root: FolderRoot, rel: string, at: { file: string; where: string }, what: string): ResolvedFile {
  const escapes = () => probesError(at.file, at.where,
    `${what} "${rel}" escapes the probe-set folder; put the file inside ${root.dir} and give its path relative to that folder`);
  if (path.isAbsolute(rel) || path.win32.isAbsolute(rel)) throw escapes();
  const file = path.resolve(root.dir, rel);
  // The folder itself is no file inside it; isInside counts it as inside, so it is refused here by name.
  if (file === path.resolve(root.dir)) {
    throw probesError(at.file, at.where, `${what} "${rel}" is the probe-set folder itself, not a file; name a file inside it, e.g. "labels.csv"`);
  }
  if (!isInside(root.dir, file)) throw escapes();
  let real: string;
  try {
    real = fs.realpathSync(file);
  } catch {
    throw probesError(at.file, at.where, `${what} "${rel}" was not found in ${root.dir}; check the name (it is relative to the probe-set folder)`);
  }
  if (!fs.statSync(real).isFile()) throw probesError(at.file, at.where, `${what} "${rel}" is not a file; name a file inside the probe-set folder`);
  return { file, canonical: path.relative(root.real, real).split(path.sep).join('/') };
}
