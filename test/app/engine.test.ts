/**
 * The engine process the Electron window talks to, run here as a Node child through the very entry file Electron's
 * utilityProcess runs (app/main/api-host.cjs), with structured-clone messages as utilityProcess uses.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fork, type ChildProcess } from 'node:child_process';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { encodeEngineContext, decodeEngineContext } from '../../app/main/api-host.ts';
import { connectEngine, type EngineClient } from '../../app/main/engine.ts';
import { buildModel } from '../../core/model/writer.ts';

const entry = path.resolve(__dirname, '../../app/main/api-host.cjs');
let tmp: string;

function spawnEngine(onExit?: (code: number | null) => void): { child: ChildProcess; engine: EngineClient } {
  const child = fork(entry, [encodeEngineContext({ dataDir: path.join(tmp, 'data') })], { serialization: 'advanced', stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
  const engine = connectEngine({
    postMessage: (m) => child.send(m as object),
    onMessage: (l) => child.on('message', l),
    onExit: (l) => child.on('exit', (code) => l(code)),
    kill: () => { child.kill(); },
  }, onExit);
  return { child, engine };
}

beforeAll(() => {
  tmp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'skein-engine-')));
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe('engine context', () => {
  it('round-trips through the command line and refuses unknown fields', () => {
    const arg = encodeEngineContext({ dataDir: '/d', nativeBinding: '/n/better_sqlite3.node' });
    expect(decodeEngineContext(['x', arg])).toEqual({ dataDir: '/d', nativeBinding: '/n/better_sqlite3.node' });
    const bad = '--skein-engine-context=' + Buffer.from(JSON.stringify({ dataDir: '/d', allowedRoots: [] })).toString('base64url');
    expect(() => decodeEngineContext([bad])).toThrow(/allowedRoots/); // zod names the unknown key
    expect(() => decodeEngineContext(['x'])).toThrow(/started without --skein-engine-context/);
  });
});

describe('engine process', () => {
  it('answers real requests through dispatch, including refusals, and a model read by onnx code', async () => {
    const { engine } = spawnEngine();
    try {
      const dir = path.join(tmp, 'files');
      fs.mkdirSync(dir, { recursive: true });
      const model = path.join(dir, 'tiny.onnx');
      fs.writeFileSync(model, buildModel({
        name: 'tiny', inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 3] }], outputs: [{ name: 'y', elemType: 'float32', dims: ['batch', 3] }],
        initializers: [], nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }],
      }));
      const [list, roots, unknown, invalid, layers] = await Promise.all([
        engine.call('fs.list', { dir }),
        engine.call('fs.roots', {}),
        engine.call('no.such', {}),
        engine.call('fs.list', { dir, extra: true }),
        engine.call('model.layers', { model }),
      ]);
      expect(list).toMatchObject({ ok: true, value: { dir, entries: [{ name: 'tiny.onnx', isModel: true, kind: 'file' }] } });
      // No allowedRoots in the desktop engine (native dialogs choose paths): the browser offers sample data, data folder, home.
      expect(roots).toMatchObject({ ok: true, value: [expect.stringMatching(/sample-data$/), path.join(tmp, 'data'), os.homedir()] });
      expect(unknown).toMatchObject({ ok: false, error: { code: 'request', where: 'method' } });
      expect(invalid).toMatchObject({ ok: false, error: { code: 'request' } });
      expect(layers.ok).toBe(true);
      expect(JSON.stringify(layers)).toContain('"y"');
      expect(engine.pending()).toBe(0);
    } finally {
      engine.stop();
    }
  });

  it('answers every waiting caller with an error when the engine dies, and reports the unexpected exit', async () => {
    let exitCode: number | null | undefined;
    let reportExit: () => void = () => {};
    const exited = new Promise<void>((resolve) => { reportExit = resolve; });
    const { child, engine } = spawnEngine((code) => { exitCode = code; reportExit(); });
    // Sent while the child is still loading its modules, so it cannot have answered when the kill lands.
    const waiting = [engine.call('fs.roots', {}), engine.call('fs.list', { dir: tmp })];
    expect(engine.pending()).toBe(2);
    child.kill('SIGKILL');
    for (const answer of await Promise.all(waiting)) {
      expect(answer).toMatchObject({ ok: false, error: { code: 'io' } });
      expect(!answer.ok && answer.error.message).toMatch(/engine stopped/);
    }
    await exited;
    expect(exitCode).toBeNull(); // killed by a signal: Node reports no exit code
    expect(engine.pending()).toBe(0);
  });

  it('does not report a requested stop as a crash', async () => {
    let crashed = false;
    const { child, engine } = spawnEngine(() => { crashed = true; });
    await engine.call('fs.roots', {});
    const gone = new Promise((r) => child.once('exit', r));
    engine.stop();
    await gone;
    expect(crashed).toBe(false);
    expect(await engine.call('fs.roots', {})).toMatchObject({ ok: false, error: { code: 'io' } });
  });
});
