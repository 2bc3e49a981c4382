/**
 * The desktop app for real: launch Electron on app/main/entry.mjs, wait for the window, call one request through
 * the preload bridge and the engine process. Runs only where the Electron binary (and Electron's better-sqlite3
 * build, `npm run electron:sqlite`) exist; elsewhere it says so loudly and is skipped.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { _electron, type ElectronApplication } from 'playwright-core';
import { electronBinary, electronRuntime } from '../../app/start.ts';
import { findElectronSqlite } from '../../app/main/native.ts';

const repo = path.resolve(__dirname, '../..');
const electron = electronBinary();

function whyNot(): string | null {
  if (!('exe' in electron)) return `SKIPPED: Electron binary not available on this machine (${electron.reason})`;
  const native = findElectronSqlite(electronRuntime());
  if ('problem' in native) return `SKIPPED: Electron's better-sqlite3 build is missing (${native.problem})`;
  return null;
}

const skipReason = whyNot();
if (skipReason) console.warn(`\n${'='.repeat(100)}\n${skipReason}\n${'='.repeat(100)}\n`);

describe.skipIf(skipReason !== null)('Electron smoke', () => {
  let app: ElectronApplication | undefined;
  const home = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-electron-'));
  afterAll(async () => {
    await app?.close();
    fs.rmSync(home, { recursive: true, force: true });
  });

  it('opens the window and answers a request through window.skein', async () => {
    const exe = (electron as { exe: string }).exe;
    app = await _electron.launch({ executablePath: exe, args: [path.join(repo, 'app', 'main', 'entry.mjs')], cwd: repo, env: { ...process.env, SKEIN_HOME: home } as Record<string, string> });
    const win = await app.firstWindow();
    await win.waitForLoadState('domcontentloaded');
    expect(win.url()).toMatch(/^skein:\/\/app\//);
    const seen = await win.evaluate(async () => {
      const w = window as unknown as { skein: { platform: string; call(m: string, b: unknown): Promise<unknown> }; require?: unknown; process?: unknown };
      return {
        platform: w.skein.platform,
        keys: Object.keys(w.skein).sort(),
        nodeVisible: typeof w.require !== 'undefined' || typeof w.process !== 'undefined',
        roots: await w.skein.call('fs.roots', {}),
        unknown: await w.skein.call('no.such.request', {}),
      };
    });
    expect(seen.platform).toBe('electron');
    expect(seen.keys).toEqual(['call', 'onOpen', 'platform']);
    expect(seen.nodeVisible).toBe(false); // contextIsolation + sandbox: the page sees no Node
    expect(seen.roots).toMatchObject({ ok: true, value: expect.arrayContaining([home]) });
    expect(seen.unknown).toMatchObject({ ok: false, error: { code: 'request', where: 'method' } });
  });
});
