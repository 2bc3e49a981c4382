/**
 * UI (Chromium, browser mode): open a study of 10^5 units → first ranked rows; open a unit's detail; one filter
 * keystroke → updated rows. Needs app/server (startServer) and the renderer build (npm run build:renderer).
 */
import fs from 'node:fs';
import path from 'node:path';
import { repoRoot } from '../lib/measure.ts';

export type UiFigure =
  | { measured: false; reason: string }
  | { measured: true; command: string; units: number; probes: number; reps: number; openMs: number; detailMs: number; filterMs: number; openRuns: number[]; detailRuns: number[]; filterRuns: number[] };

export function uiMissing(): string | null {
  const pkg = JSON.parse(fs.readFileSync(path.join(repoRoot, 'package.json'), 'utf8')) as { scripts?: Record<string, string> };
  const missing: string[] = [];
  if (!pkg.scripts?.['build:renderer']) missing.push('no "build:renderer" script in package.json');
  if (!fs.existsSync(path.join(repoRoot, 'app/renderer'))) missing.push('no app/renderer');
  const server = path.join(repoRoot, 'app/server/index.ts');
  if (!fs.existsSync(server) || !/export\s+(async\s+)?function\s+startServer/.test(fs.readFileSync(server, 'utf8'))) missing.push('no startServer in app/server/index.ts');
  return missing.length ? `the screens are not built yet (${missing.join('; ')})` : null;
}

export async function uiFigure(_dir: string, _units: number, _probes: number, _reps: number, _log: (s: string) => void): Promise<UiFigure> {
  const missing = uiMissing();
  if (missing) return { measured: false, reason: missing };
  return { measured: false, reason: 'the UI measurement is not written yet' };
}
