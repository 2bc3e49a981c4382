/**
 * What a transport hands the API (ApiContext) and the check of every path a request names against browser mode's
 * allowed folders. Its own module so handlers, the contract and the transports can use it without an import cycle.
 */
import { SkeinError } from '../errors.ts';
import { isInsideAny } from '../fs/index.ts';

/** What a transport hands the API: nothing global, everything passed in. */
export interface ApiContext {
  /** Electron's own better-sqlite3 build, when running inside Electron. */
  nativeBinding?: string;
  /**
   * Browser mode: every path in every request must lie inside one of these folders (the demo folder, the user's
   * data folder and folders named on the command line). Unset: any path (CLI, Electron with native dialogs).
   */
  allowedRoots?: string[];
  /** The user's data folder (demo study, recent files): `$SKEIN_HOME` or `~/.skein` when unset. */
  dataDir?: string;
}

/** Request fields that hold file or folder paths, checked against ApiContext.allowedRoots. */
export const PATH_FIELDS = ['model', 'probes', 'study', 'out', 'dir', 'file', 'csv'] as const;

/** Refuses a path outside browser mode's allowed folders, naming the field; does nothing when roots are unset. */
export function checkPath(p: string, field: string, roots: string[] | undefined): void {
  if (!roots || isInsideAny(p, roots)) return;
  throw new SkeinError({ code: 'request', file: p, where: field, message: `This path is outside the folders Skein may use in browser mode (${roots.join(', ')}). Move the file there or restart Skein naming its folder on the command line.` });
}

/** Checks every path field of a validated request (string fields named in PATH_FIELDS). */
export function checkPaths(req: Record<string, unknown>, roots: string[] | undefined): void {
  if (!roots) return;
  for (const field of PATH_FIELDS) {
    const v = req[field];
    if (typeof v === 'string') checkPath(v, field, roots);
  }
}

/**
 * Refuses a path read from a study (its model file, its probe-set folder) that lies outside browser mode's allowed
 * folders: a study inside an allowed folder must not open a door to files outside them.
 */
export function checkStoredPath(p: string, what: string, study: string, roots: string[] | undefined): void {
  if (!roots || isInsideAny(p, roots)) return;
  throw new SkeinError({ code: 'request', file: study, where: what, message: `This study's ${what} (${p}) is outside the folders Skein may use in browser mode (${roots.join(', ')}). Restart Skein naming that folder on the command line, or rescan with files inside an allowed folder.` });
}
