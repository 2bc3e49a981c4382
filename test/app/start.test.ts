/**
 * `npm start` as a user runs it: a real child process (npm → sh → tsx → node), the URL line it prints, the page behind
 * that URL, and Ctrl-C (SIGINT to the whole process group, as a terminal sends it) stopping it. Through npm the exit
 * status is npm's own answer to Ctrl-C (sh and npm die of the signal, common practice, no source), so the exit code
 * 0 of Skein itself is checked on the script's command, `tsx app/start.ts`, run directly.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { spawn, type ChildProcess } from 'node:child_process';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { electronBinary, parseStartArgs } from '../../app/start.ts';

const repo = path.resolve(__dirname, '../..');
const URL_LINE = /^http:\/\/127\.0\.0\.1:(\d+)\/\?token=([A-Za-z0-9_-]{32})$/m;
let tmp: string;
let renderer: string;

interface Started {
  child: ChildProcess; stdout: () => string; stderr: () => string; url: string;
  /** Resolves when the process has ended and every process holding its output (grandchildren too) has closed it. */
  closed: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;
}

/** Starts `npm start -- ARGS` (or another command) in its own process group and waits for the URL line. */
function start(args: string[], command: string[] = ['npm', 'start', '--']): Promise<Started> {
  const child = spawn(command[0], [...command.slice(1), ...args], {
    cwd: repo, detached: true, stdio: ['ignore', 'pipe', 'pipe'],
    env: { ...process.env, SKEIN_HOME: path.join(tmp, 'home'), SKEIN_RENDERER_DIR: renderer },
  });
  let out = '';
  let err = '';
  const closed = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((resolve) => child.on('close', (code, signal) => resolve({ code, signal })));
  return new Promise((resolve, reject) => {
    child.stderr!.on('data', (d: Buffer) => { err += d.toString(); });
    child.stdout!.on('data', (d: Buffer) => {
      out += d.toString();
      const m = URL_LINE.exec(out);
      if (m) resolve({ child, stdout: () => out, stderr: () => err, url: m[0], closed });
    });
    void closed.then(({ code }) => reject(new Error(`npm start ended (code ${code}) before printing a URL.\nstdout:\n${out}\nstderr:\n${err}`)));
  });
}

beforeAll(() => {
  tmp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'skein-start-')));
  renderer = path.join(tmp, 'renderer');
  fs.mkdirSync(renderer);
  fs.writeFileSync(path.join(renderer, 'index.html'), '<!doctype html><title>Skein start test</title>');
});
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe('npm start -- --browser --no-open', () => {
  it('prints the URL on a line of its own, serves the page with the token, and shuts down cleanly on Ctrl-C', async () => {
    const s = await start(['--browser', '--no-open']);
    try {
      expect(s.stdout()).not.toMatch(/Electron is not available/); // forced browser mode says nothing about Electron
      const page = await fetch(s.url);
      expect(page.status).toBe(200);
      expect(await page.text()).toContain('Skein start test');
      const cookie = (page.headers.get('set-cookie') ?? '').split(';')[0];
      const origin = new URL(s.url).origin;
      const roots = await (await fetch(`${origin}/api/fs.roots`, { method: 'POST', headers: { cookie }, body: '{}' })).json();
      // Roots: the repository's sample data and the data folder ($SKEIN_HOME), as the brief for npm start says.
      expect(roots).toEqual({ ok: true, value: [path.join(repo, 'sample-data'), path.join(tmp, 'home')] });
      expect((await fetch(`${origin}/`)).status).toBe(401); // the token is what opens it
      expect(fs.existsSync(path.join(tmp, 'home'))).toBe(true);
    } finally {
      process.kill(-s.child.pid!, 'SIGINT');
    }
    await s.closed;
    expect(s.stderr()).toContain('Skein stopped.'); // the clean shutdown ran: server closed, then exit
    await expect(fetch(s.url)).rejects.toThrow(/fetch failed/); // nothing listens any more (connection refused)
  });

  it('exits with code 0 on SIGINT (the script command, tsx app/start.ts, without npm around it)', async () => {
    const s = await start(['--browser', '--no-open'], [path.join(repo, 'node_modules', '.bin', 'tsx'), 'app/start.ts']);
    expect((await fetch(s.url)).status).toBe(200);
    process.kill(-s.child.pid!, 'SIGINT');
    expect(await s.closed).toEqual({ code: 0, signal: null });
  });

  it('adds folders named on the command line to the roots', async () => {
    const extra = path.join(tmp, 'my-models');
    fs.mkdirSync(extra);
    const s = await start(['--browser', '--no-open', extra]);
    try {
      const { origin, searchParams } = new URL(s.url);
      const r = await fetch(`${origin}/api/fs.list`, { method: 'POST', headers: { 'x-skein-token': searchParams.get('token')! }, body: JSON.stringify({ dir: extra }) });
      expect(await r.json()).toMatchObject({ ok: true, value: { dir: extra, entries: [] } });
    } finally {
      process.kill(-s.child.pid!, 'SIGINT');
    }
    await s.closed;
    expect(s.stderr()).toContain('Skein stopped.');
  });
});

describe('npm start without --browser', () => {
  it.skipIf('exe' in electronBinary())('says in one line that Electron is not available and falls back to browser mode', async () => {
    const s = await start(['--no-open']);
    try {
      const notices = s.stdout().split('\n').filter((l) => /Electron/.test(l));
      expect(notices).toHaveLength(1);
      expect(notices[0]).toMatch(/^Electron is not available here \(.+\); falling back to browser mode\.$/);
      expect((await fetch(s.url)).status).toBe(200);
    } finally {
      process.kill(-s.child.pid!, 'SIGINT');
    }
    await s.closed;
    expect(s.stderr()).toContain('Skein stopped.');
  });
});

describe('parseStartArgs', () => {
  it('reads the flags and resolves named paths', () => {
    expect(parseStartArgs(['--browser', '--no-open', '--port', '8123', 'models'])).toEqual({ browser: true, open: false, port: 8123, paths: [path.resolve('models')] });
    expect(parseStartArgs([])).toEqual({ browser: false, open: true, port: 0, paths: [] });
    expect(() => parseStartArgs(['--port', '70000'])).toThrow(/0 to 65535/);
    expect(() => parseStartArgs(['--bogus'])).toThrow(/Unknown option '--bogus'/); // node:util parseArgs strict mode
  });
});
