/**
 * What the desktop shell remembers between launches: recent studies and the light/dark choice, as one JSON file in
 * Electron's user data folder. Written with core/fs's durable write, so a crash never leaves half a file. Plain Node.
 */
import fs from 'node:fs';
import path from 'node:path';
import { z } from 'zod';
import { writeFileDurably } from '../../core/fs/index.ts';

export const MAX_RECENT = 10;

const shellStateSchema = z.strictObject({
  version: z.literal(1),
  recentStudies: z.array(z.string().min(1)).max(100),
  theme: z.enum(['system', 'light', 'dark']),
});
export type ShellState = z.infer<typeof shellStateSchema>;
export type Theme = ShellState['theme'];

export const emptyState = (): ShellState => ({ version: 1, recentStudies: [], theme: 'system' });

/**
 * Reads the state; a missing file is a first launch. An unreadable one is kept aside as `<file>.bad` (never
 * overwritten silently) and the shell starts fresh.
 */
export function readShellState(file: string): ShellState {
  let text: string;
  try {
    text = fs.readFileSync(file, 'utf8');
  } catch {
    return emptyState();
  }
  try {
    return shellStateSchema.parse(JSON.parse(text));
  } catch {
    fs.renameSync(file, `${file}.bad`);
    return emptyState();
  }
}

export function writeShellState(file: string, state: ShellState): void {
  writeFileDurably(file, JSON.stringify(shellStateSchema.parse(state), null, 1) + '\n');
}

/** Most recent first, no duplicates, at most MAX_RECENT. */
export function withRecentStudy(state: ShellState, study: string): ShellState {
  const abs = path.resolve(study);
  return { ...state, recentStudies: [abs, ...state.recentStudies.filter((s) => s !== abs)].slice(0, MAX_RECENT) };
}

/** Drops entries whose file is gone, so the menu never offers a dead end. */
export function withoutMissing(state: ShellState, exists: (p: string) => boolean = fs.existsSync): ShellState {
  return { ...state, recentStudies: state.recentStudies.filter(exists) };
}
