/** The file-browser and demo requests over real loopback HTTP, confined to the allowed roots. */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startServer, type RunningServer } from '../../app/server/index.ts';
import { buildModel } from '../../core/model/writer.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { createApi } from '../../core/api/index.ts';
import { defaultDataDir, sampleDataDir } from '../../core/api/files.ts';

let tmp: string;
let root: string;
let outside: string;
let data: string;
let server: RunningServer;

async function call(method: string, body: unknown) {
  const r = await fetch(`${server.origin}/api/${method}`, { method: 'POST', headers: { 'x-skein-token': server.token }, body: JSON.stringify(body) });
  expect(r.status).toBe(200);
  return r.json();
}

beforeAll(async () => {
  tmp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'skein-files-')));
  root = path.join(tmp, 'root');
  outside = path.join(tmp, 'outside');
  data = path.join(tmp, 'data');
  for (const d of [root, outside, data, path.join(root, 'tiles-set'), path.join(root, 'plain-folder')]) fs.mkdirSync(d, { recursive: true });
  fs.writeFileSync(path.join(root, 'net.onnx'), buildModel({
    name: 'n', inputs: [{ name: 'x', elemType: 'float32', dims: [1, 2] }], outputs: [{ name: 'y', elemType: 'float32', dims: [1, 2] }],
    initializers: [], nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }],
  }));
  fs.writeFileSync(path.join(root, 'tiles-set', 'manifest.json'), '{}');
  openStudyDb(path.join(root, 'first.study'), { create: true }).close();
  fs.writeFileSync(path.join(root, 'fake.study'), 'SQLite format 3\0'.padEnd(200, '\0')); // SQLite magic, no Skein mark
  fs.writeFileSync(path.join(root, 'notes.txt'), 'hello');
  fs.writeFileSync(path.join(root, '.hidden'), 'x');
  fs.writeFileSync(path.join(outside, 'private.onnx'), 'x');
  fs.symlinkSync(outside, path.join(root, 'escape-dir'));
  fs.symlinkSync(path.join(outside, 'private.onnx'), path.join(root, 'escape-file.onnx'));
  fs.symlinkSync(path.join(root, 'notes.txt'), path.join(root, 'inside-link.txt'));
  server = await startServer({ roots: [root, data], rendererDir: path.join(tmp, 'no-build'), dataDir: data });
});

afterAll(async () => {
  await server?.close();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe('fs.list', () => {
  it('lists a root: folders first, kinds, sizes and what each entry is', async () => {
    const env = await call('fs.list', { dir: root });
    expect(env.ok).toBe(true);
    const { dir, parent, entries, truncated } = env.value;
    expect(dir).toBe(root);
    expect(parent).toBeNull(); // a root: nothing above it may be shown
    expect(truncated).toBe(false);
    const names = entries.map((e: { name: string }) => e.name);
    expect(names).toEqual(['plain-folder', 'tiles-set', 'fake.study', 'first.study', 'inside-link.txt', 'net.onnx', 'notes.txt']);
    const byName = Object.fromEntries(entries.map((e: { name: string }) => [e.name, e]));
    expect(byName['tiles-set']).toEqual({ name: 'tiles-set', path: path.join(root, 'tiles-set'), kind: 'dir', size: null, isModel: false, isProbeSet: true, isStudy: false });
    expect(byName['plain-folder'].isProbeSet).toBe(false);
    expect(byName['net.onnx']).toMatchObject({ kind: 'file', isModel: true, isStudy: false, size: fs.statSync(path.join(root, 'net.onnx')).size });
    expect(byName['first.study']).toMatchObject({ kind: 'file', isStudy: true, isModel: false });
    expect(byName['fake.study'].isStudy).toBe(false);
    expect(byName['notes.txt']).toMatchObject({ size: 5, isModel: false, isStudy: false });
  });

  it('shows dot files only when asked', async () => {
    const env = await call('fs.list', { dir: root, hidden: true });
    expect(env.value.entries.map((e: { name: string }) => e.name)).toContain('.hidden');
  });

  it('gives the parent of a folder inside a root', async () => {
    const env = await call('fs.list', { dir: path.join(root, 'tiles-set') });
    expect(env.value.parent).toBe(root);
    expect(env.value.entries.map((e: { name: string }) => e.name)).toEqual(['manifest.json']);
  });

  it('refuses a folder outside the roots', async () => {
    for (const dir of [outside, '/etc', path.join(root, '..')]) {
      const env = await call('fs.list', { dir });
      expect(env.ok).toBe(false);
      expect(env.error).toMatchObject({ code: 'request', where: 'dir' });
      expect(env.error.message).toMatch(/outside the folders Skein may use/);
    }
  });

  it('refuses a link inside a root that leads outside it, and leaves such links out of listings', async () => {
    const env = await call('fs.list', { dir: path.join(root, 'escape-dir') });
    expect(env).toMatchObject({ ok: false, error: { code: 'request', where: 'dir' } });
    const inspect = await call('model.layers', { model: path.join(root, 'escape-file.onnx') });
    expect(inspect).toMatchObject({ ok: false, error: { code: 'request', where: 'model' } });
    const listing = await call('fs.list', { dir: root });
    const names = listing.value.entries.map((e: { name: string }) => e.name);
    expect(names).not.toContain('escape-dir');
    expect(names).not.toContain('escape-file.onnx');
    expect(names).toContain('inside-link.txt');
  });

  it('says what is wrong with a missing folder or a file given as folder', async () => {
    const missing = await call('fs.list', { dir: path.join(root, 'gone') });
    expect(missing.error).toMatchObject({ code: 'io', where: 'dir' });
    expect(missing.error.message).toMatch(/does not exist/);
    const file = await call('fs.list', { dir: path.join(root, 'notes.txt') });
    expect(file.error.message).toMatch(/file, not a folder/);
  });
});

describe('study.saveAs', () => {
  it('writes a consistent copy that opens as the same study, and leaves the original as it was', async () => {
    const from = path.join(root, 'first.study');
    const before = fs.readFileSync(from);
    const out = path.join(data, 'copy.study');
    const env = await call('study.saveAs', { study: from, out });
    expect(env).toEqual({ ok: true, value: { file: out } });
    const a = openStudyDb(from, { readonly: true });
    const b = openStudyDb(out, { readonly: true });
    try {
      const tables = (db: typeof a) => db.prepare(`SELECT name, sql FROM sqlite_master ORDER BY name`).all();
      expect(tables(b)).toEqual(tables(a));
      expect(b.pragma('application_id', { simple: true })).toBe(a.pragma('application_id', { simple: true }));
      expect(b.pragma('user_version', { simple: true })).toBe(a.pragma('user_version', { simple: true }));
    } finally {
      a.close();
      b.close();
    }
    expect(fs.readFileSync(from).equals(before)).toBe(true);
    expect(fs.readdirSync(data).filter((n) => n.includes('.tmp'))).toEqual([]); // no temporary file of the durable write is left
  });

  it('refuses the study itself, a name without .study, a file that is no study, and a target outside the roots', async () => {
    const from = path.join(root, 'first.study');
    expect((await call('study.saveAs', { study: from, out: from })).error.message).toMatch(/the study itself/);
    expect((await call('study.saveAs', { study: from, out: path.join(data, 'copy.db') })).error).toMatchObject({ code: 'request', where: 'out' });
    expect((await call('study.saveAs', { study: path.join(root, 'fake.study'), out: path.join(data, 'x.study') })).error.code).toBe('study');
    expect((await call('study.saveAs', { study: from, out: path.join(outside, 'x.study') })).error).toMatchObject({ code: 'request', where: 'out' });
    expect(fs.existsSync(path.join(outside, 'x.study'))).toBe(false);
  });
});

describe('fs.roots and app.demo', () => {
  it('returns the roots', async () => {
    expect(await call('fs.roots', {})).toEqual({ ok: true, value: [root, data] });
  });

  it('places the demo study in the data folder and points at the sample data', async () => {
    const env = await call('app.demo', {});
    const model = path.join(sampleDataDir(), 'tiles-model.onnx');
    if (fs.existsSync(model) && fs.existsSync(path.join(sampleDataDir(), 'tiles'))) {
      expect(env).toEqual({ ok: true, value: { model, probes: path.join(sampleDataDir(), 'tiles'), study: path.join(data, 'demo.study') } });
    } else {
      expect(env).toMatchObject({ ok: false, error: { code: 'io' } });
      expect(env.error.message).toMatch(/npm run sample-data/);
    }
    expect(sampleDataDir()).toBe(path.resolve(__dirname, '../../sample-data'));
  });

  it('takes the data folder from SKEIN_HOME, else ~/.skein', () => {
    expect(defaultDataDir({ SKEIN_HOME: path.join(tmp, 'home') })).toBe(path.join(tmp, 'home'));
    expect(defaultDataDir({})).toBe(path.join(os.homedir(), '.skein'));
  });

  it('offers home, data and sample folders as roots when no roots are set (Electron)', async () => {
    const api = createApi({ dataDir: data });
    const roots = await api['fs.roots']({});
    expect(roots).toEqual([sampleDataDir(), data, os.homedir()]);
  });
});
