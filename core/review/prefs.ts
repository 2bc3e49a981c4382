/**
 * The user's preferences file (`<data folder>/preferences.json`): the reviewer name is set once and signs every edit.
 * Other keys in the file (other preferences) are kept as they are. A broken file never blocks the app: it reads as
 * "no name set" with the problem named, and the next save moves it aside instead of deleting it.
 */
import fs from 'node:fs';
import path from 'node:path';
import { writeFileDurably } from '../fs/index.ts';
import { reviewerSchema } from './vocabulary.ts';

export interface Preferences {
  reviewer: string | null;
  file: string;
  /** Why the file could not be used, when it could not; null when fine or absent. */
  problem: string | null;
}

export function preferencesFile(dataDir: string): string {
  return path.join(path.resolve(dataDir), 'preferences.json');
}

function readRaw(file: string): { data: Record<string, unknown>; problem: string | null } {
  let text: string;
  try {
    text = fs.readFileSync(file, 'utf8');
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'ENOENT') return { data: {}, problem: null };
    return { data: {}, problem: `cannot read it (${(e as Error).message})` };
  }
  try {
    const v = JSON.parse(text) as unknown;
    if (typeof v !== 'object' || v === null || Array.isArray(v)) return { data: {}, problem: 'it is not a JSON object' };
    return { data: v as Record<string, unknown>, problem: null };
  } catch (e) {
    return { data: {}, problem: `it is not valid JSON (${(e as Error).message})` };
  }
}

export function readPreferences(dataDir: string): Preferences {
  const file = preferencesFile(dataDir);
  const { data, problem } = readRaw(file);
  if (problem) return { reviewer: null, file, problem: `The preferences file ${file} is unusable: ${problem}. Set your reviewer name again; the old file will be kept beside it.` };
  if (data.reviewer === undefined || data.reviewer === null) return { reviewer: null, file, problem: null };
  const r = reviewerSchema.safeParse(data.reviewer);
  return r.success
    ? { reviewer: r.data, file, problem: null }
    : { reviewer: null, file, problem: `The reviewer name in ${file} is not usable (${r.error.issues[0].message}). Set it again.` };
}

/** Saves the reviewer name atomically, keeping the file's other keys. */
export function saveReviewer(dataDir: string, reviewer: string): Preferences {
  const file = preferencesFile(dataDir);
  const { data, problem } = readRaw(file);
  if (problem && fs.existsSync(file)) fs.renameSync(file, `${file}.broken-${Date.now()}`);
  writeFileDurably(file, JSON.stringify({ ...data, reviewer }, null, 1) + '\n');
  return { reviewer, file, problem: null };
}
