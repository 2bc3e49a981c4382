/**
 * The desktop shell's plain-Node parts, which the Electron main process only wires up: who is trusted (policy), what it
 * remembers (state), its menu, and which better-sqlite3 build it loads (native).
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { createRequire } from 'node:module';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { MenuItemConstructorOptions } from 'electron';
import { isRendererUrl, pathsFromArgv, toOpenItem, RENDERER_ENTRY } from '../../app/main/policy.ts';
import { readShellState, writeShellState, withRecentStudy, withoutMissing, emptyState, MAX_RECENT } from '../../app/main/state.ts';
import { menuTemplate, type MenuActions } from '../../app/main/menu.ts';
import { findElectronSqlite, BINDING_FILE, INFO_FILE } from '../../app/main/native.ts';
import { addonAbi } from '../../app/main/electron-sqlite.ts';
import { buildModel } from '../../core/model/writer.ts';
import { openStudyDb } from '../../core/store/study.ts';

let tmp: string;
beforeAll(() => { tmp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'skein-shell-'))); });
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe('policy', () => {
  it('trusts only pages of skein://app', () => {
    expect(isRendererUrl(RENDERER_ENTRY)).toBe(true);
    expect(isRendererUrl('skein://app/index.html#/units?layer=3')).toBe(true);
    for (const url of ['file:///work/main/app/renderer/dist/index.html', 'skein://evil/index.html', 'skein://app:8080/', 'skein://user@app/',
      'https://app/index.html', 'http://127.0.0.1:5173/', 'about:blank', '', null, undefined, 'not a url']) {
      expect(isRendererUrl(url)).toBe(false);
    }
  });

  it('opens models, probe sets and studies, and nothing else', () => {
    const model = path.join(tmp, 'm.onnx');
    fs.writeFileSync(model, buildModel({ name: 'm', inputs: [{ name: 'x', elemType: 'float32', dims: [1] }], outputs: [{ name: 'y', elemType: 'float32', dims: [1] }], initializers: [], nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }] }));
    const probes = path.join(tmp, 'set');
    fs.mkdirSync(probes);
    fs.writeFileSync(path.join(probes, 'manifest.json'), '{}');
    const study = path.join(tmp, 's.study');
    openStudyDb(study, { create: true }).close();
    fs.writeFileSync(path.join(tmp, 'readme.txt'), 'x');
    expect(toOpenItem(model)).toEqual({ kind: 'model', path: model });
    expect(toOpenItem(probes)).toEqual({ kind: 'probes', path: probes });
    expect(toOpenItem(study)).toEqual({ kind: 'study', path: study });
    expect(toOpenItem(path.join(tmp, 'readme.txt'))).toBeNull();
    expect(toOpenItem(path.join(tmp, 'missing.onnx'))).toBeNull();
    expect(toOpenItem(tmp)).toBeNull(); // a folder without manifest.json
  });

  it('takes paths from Electron command lines, skipping the executable, the entry script and flags', () => {
    expect(pathsFromArgv(['/x/electron', '/r/app/main/entry.mjs', '--inspect', 'a.onnx', 'set'], false)).toEqual(['a.onnx', 'set']);
    expect(pathsFromArgv(['/Applications/Skein', 'a.study'], true)).toEqual(['a.study']);
  });
});

describe('shell state', () => {
  it('starts empty, keeps recent studies newest first without duplicates, at most MAX_RECENT', () => {
    const file = path.join(tmp, 'state', 'shell-state.json');
    expect(readShellState(file)).toEqual(emptyState());
    let s = emptyState();
    for (let i = 0; i < MAX_RECENT + 3; i++) s = withRecentStudy(s, path.join(tmp, `s${i}.study`));
    s = withRecentStudy(s, path.join(tmp, 's5.study'));
    expect(s.recentStudies).toHaveLength(MAX_RECENT);
    expect(s.recentStudies[0]).toBe(path.join(tmp, 's5.study'));
    expect(s.recentStudies.filter((p) => p.endsWith('s5.study'))).toHaveLength(1);
    writeShellState(file, { ...s, theme: 'dark' });
    expect(readShellState(file)).toEqual({ ...s, theme: 'dark' });
    expect(fs.readdirSync(path.dirname(file))).toEqual(['shell-state.json']); // no temporary file left behind
  });

  it('keeps an unreadable state file aside instead of overwriting it', () => {
    const file = path.join(tmp, 'bad', 'shell-state.json');
    fs.mkdirSync(path.dirname(file));
    fs.writeFileSync(file, '{"version": 1, "recentStudies": [');
    expect(readShellState(file)).toEqual(emptyState());
    expect(fs.readFileSync(`${file}.bad`, 'utf8')).toBe('{"version": 1, "recentStudies": [');
  });

  it('drops studies that no longer exist', () => {
    const kept = path.join(tmp, 'kept.study');
    fs.writeFileSync(kept, '');
    const s = withRecentStudy(withRecentStudy(emptyState(), path.join(tmp, 'gone.study')), kept);
    expect(withoutMissing(s).recentStudies).toEqual([kept]);
  });
});

describe('menu', () => {
  const calls: string[] = [];
  const actions: MenuActions = {
    openModel: () => calls.push('model'), openProbes: () => calls.push('probes'), openStudy: () => calls.push('study'),
    saveStudyAs: () => calls.push('save'), openRecent: (p) => calls.push(`recent ${p}`), clearRecent: () => calls.push('clear'),
    setTheme: (t) => calls.push(`theme ${t}`),
  };
  const find = (items: MenuItemConstructorOptions[], label: string): MenuItemConstructorOptions | undefined => {
    for (const item of items) {
      if (item.label === label) return item;
      const inner = Array.isArray(item.submenu) ? find(item.submenu, label) : undefined;
      if (inner) return inner;
    }
    return undefined;
  };
  const click = (item: MenuItemConstructorOptions | undefined) => (item!.click as () => void)();

  it('has File and View with the commands, recent studies and the theme choice', () => {
    const t = menuTemplate({ platform: 'linux', recentStudies: ['/d/a.study', '/d/b.study'], theme: 'dark', canSave: true, dev: false }, actions);
    expect(t.map((m) => m.label ?? m.role)).toEqual(['&File', 'editMenu', '&View', 'windowMenu']);
    for (const label of ['Open model…', 'Open probe set…', 'Open study…', 'Save study as…']) expect(find(t, label)).toBeDefined();
    click(find(t, 'Open model…'));
    click(find(t, 'Open probe set…'));
    click(find(t, 'Save study as…'));
    const recent = find(t, 'Recent studies')!.submenu as MenuItemConstructorOptions[];
    click(recent[0]);
    click(find(t, 'Clear list'));
    expect(find(t, 'Dark')!.checked).toBe(true);
    expect(find(t, 'Light')!.checked).toBe(false);
    click(find(t, 'Light'));
    expect(calls).toEqual(['model', 'probes', 'save', 'recent /d/a.study', 'clear', 'theme light']);
    expect(find(t, 'toggleDevTools')).toBeUndefined();
  });

  it('disables Save study as… without a study and says when there are no recent studies', () => {
    const t = menuTemplate({ platform: 'darwin', recentStudies: [], theme: 'system', canSave: false, dev: true }, actions);
    expect(t[0].role).toBe('appMenu');
    expect(find(t, 'Save study as…')!.enabled).toBe(false);
    expect(find(t, 'No recent studies')!.enabled).toBe(false);
  });
});

describe('native binding', () => {
  const runtime = { modules: '150', platform: 'linux', arch: 'x64', electron: '45.5.0' };
  const writeBuild = (dir: string, info: object) => {
    fs.mkdirSync(dir, { recursive: true });
    fs.writeFileSync(path.join(dir, BINDING_FILE), 'binary');
    fs.writeFileSync(path.join(dir, INFO_FILE), JSON.stringify(info));
  };

  it('points at npm run electron:sqlite when there is no build', () => {
    const r = findElectronSqlite(runtime, path.join(tmp, 'none'));
    expect('problem' in r && r.problem).toMatch(/npm run electron:sqlite/);
  });

  it('accepts a build for this runtime and refuses one for another ABI', () => {
    const good = path.join(tmp, 'native-good');
    writeBuild(good, { electron: '45.5.0', modules: '150', platform: 'linux', arch: 'x64', builtAt: 'now', method: 'node-gyp' });
    expect(findElectronSqlite(runtime, good)).toMatchObject({ binding: path.join(good, BINDING_FILE) });
    const old = path.join(tmp, 'native-old');
    writeBuild(old, { electron: '44.0.0', modules: '145', platform: 'linux', arch: 'x64', builtAt: 'now', method: 'node-gyp' });
    const r = findElectronSqlite(runtime, old);
    expect('problem' in r && r.problem).toMatch(/for Electron 44\.0\.0 \(ABI 145.*this is Electron 45\.5\.0 \(ABI 150.*npm run electron:sqlite/);
  });

  it("reads an addon's ABI from its registration symbol: Node's own better-sqlite3 build has Node's ABI", () => {
    // process.versions.modules is the NODE_MODULE_VERSION of the running Node (Node.js docs, process.versions).
    const nodeBuild = path.join(path.dirname(createRequire(import.meta.url).resolve('better-sqlite3/package.json')), 'build', 'Release', 'better_sqlite3.node');
    expect(addonAbi(nodeBuild)).toBe(process.versions.modules);
  });
});

describe('packaging configuration', () => {
  it('starts the packaged app at the Electron entry, ships what the shell loads, and pins the installed Electron', async () => {
    const { default: config } = await import('../../electron.config.ts');
    const repo = path.resolve(__dirname, '../..');
    expect(fs.existsSync(path.join(repo, config.extraMetadata.main))).toBe(true);
    for (const dir of ['app/main', 'app/preload', 'app/server', 'core']) expect(config.files).toContain(`${dir}/**`);
    for (const file of ['app/main/entry.mjs', 'app/main/api-host.cjs', 'app/preload/index.cjs']) expect(fs.existsSync(path.join(repo, file))).toBe(true);
    const installed = (JSON.parse(fs.readFileSync(path.join(repo, 'node_modules', 'electron', 'package.json'), 'utf8')) as { version: string }).version;
    expect(config.electronVersion).toBe(installed);
  });
});

describe('electron runtime', () => {
  it("reads the installed Electron's version and addon ABI", async () => {
    const { electronRuntime } = await import('../../app/start.ts');
    const rt = electronRuntime();
    const dir = path.resolve(__dirname, '../../node_modules/electron');
    expect(rt.electron).toBe((JSON.parse(fs.readFileSync(path.join(dir, 'package.json'), 'utf8')) as { version: string }).version);
    expect(rt.modules).toMatch(/^\d+$/);
    expect(Number(rt.modules)).toBeGreaterThan(Number(process.versions.modules)); // Electron 45 is newer than this Node 20
  });
});
