/**
 * Who the desktop shell trusts and what it opens, as plain functions (no electron import) so they are tested under
 * Node. The window's page comes from our own privileged scheme, never file:// (Electron's security checklist prefers
 * a custom protocol: file:// pages share one origin with every file on disk).
 */
import path from 'node:path';
import { classifyOpenable } from '../../core/api/files.ts';

export const RENDERER_SCHEME = 'skein';
export const RENDERER_HOST = 'app';
export const RENDERER_ORIGIN = `${RENDERER_SCHEME}://${RENDERER_HOST}`;
export const RENDERER_ENTRY = `${RENDERER_ORIGIN}/index.html`;

/** What the preload delivers to window.skein.onOpen. */
export interface OpenItem { kind: 'model' | 'probes' | 'study'; path: string }

/** True only for a page of our renderer: scheme and host exact, no credentials or port smuggled in. */
export function isRendererUrl(url: string | undefined | null): boolean {
  if (!url) return false;
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    return false;
  }
  return u.protocol === `${RENDERER_SCHEME}:` && u.hostname === RENDERER_HOST && u.port === '' && u.username === '' && u.password === '';
}

/** A path from a drop, a dialog or the command line, as something to open, or null with nothing Skein can open. */
export function toOpenItem(file: string): OpenItem | null {
  const kind = classifyOpenable(file);
  return kind ? { kind, path: path.resolve(file) } : null;
}

/** Paths on Electron's command line: after the executable and (unpackaged) the entry script; flags skipped. */
export function pathsFromArgv(argv: string[], packaged: boolean): string[] {
  return argv.slice(packaged ? 1 : 2).filter((a) => !a.startsWith('-'));
}
