/**
 * Browser mode over real loopback HTTP: the token, Host and Origin checks, the path confinement, body limits,
 * static files and their headers. The security rules pinned here are common practice, no source (token per
 * launch, DNS-rebinding Host check, same-origin check, CSP), as set out in notes/APP.md.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startServer, CONTENT_SECURITY_POLICY, type RunningServer } from '../../app/server/index.ts';
import { buildModel } from '../../core/model/writer.ts';
import { rawRequest } from './helpers.ts';

let tmp: string;
let root: string;
let renderer: string;
let server: RunningServer;

const call = (method: string, body: unknown, headers: Record<string, string> = {}) => fetch(`${server.origin}/api/${method}`, {
  method: 'POST', headers: { 'content-type': 'application/json', 'x-skein-token': server.token, ...headers }, body: JSON.stringify(body),
});

beforeAll(async () => {
  tmp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'skein-server-')));
  root = path.join(tmp, 'root');
  renderer = path.join(tmp, 'renderer');
  fs.mkdirSync(path.join(root, 'inner'), { recursive: true });
  fs.mkdirSync(path.join(renderer, 'assets'), { recursive: true });
  fs.writeFileSync(path.join(renderer, 'index.html'), '<!doctype html><title>Skein test page</title><script type="module" src="/assets/app.js"></script>');
  fs.writeFileSync(path.join(renderer, 'assets', 'app.js'), 'console.log("skein");');
  fs.writeFileSync(path.join(renderer, 'assets', 'look.css'), 'body{}');
  fs.writeFileSync(path.join(tmp, 'secret.txt'), 'TOP-SECRET-NEXT-TO-RENDERER');
  fs.symlinkSync(path.join(tmp, 'secret.txt'), path.join(renderer, 'linked-secret.txt'));
  server = await startServer({ roots: [root], rendererDir: renderer, dataDir: path.join(tmp, 'data') });
});

afterAll(async () => {
  await server?.close();
  fs.rmSync(tmp, { recursive: true, force: true });
});

describe('token', () => {
  it('refuses an API request without a token with 401', async () => {
    const r = await fetch(`${server.origin}/api/fs.roots`, { method: 'POST', body: '{}' });
    expect(r.status).toBe(401);
  });

  it('refuses a wrong token with 401, also one differing only in the last character', async () => {
    const wrong = server.token.slice(0, -1) + (server.token.endsWith('A') ? 'B' : 'A');
    expect((await call('fs.roots', {}, { 'x-skein-token': wrong })).status).toBe(401);
    expect((await call('fs.roots', {}, { 'x-skein-token': 'x' })).status).toBe(401);
  });

  it('refuses static files without the token', async () => {
    expect((await fetch(`${server.origin}/`)).status).toBe(401);
    expect((await fetch(`${server.origin}/assets/app.js`)).status).toBe(401);
  });

  it('is 24 random bytes in base64url and differs between launches', async () => {
    const other = await startServer({ roots: [root], rendererDir: renderer, dataDir: path.join(tmp, 'data') });
    try {
      expect(server.token).toMatch(/^[A-Za-z0-9_-]{32}$/); // 24 bytes → 32 base64url characters (RFC 4648 §5)
      expect(other.token).not.toBe(server.token);
      expect(other.url).toBe(`http://127.0.0.1:${other.port}/?token=${other.token}`);
    } finally {
      await other.close();
    }
  });

  it('sets an HttpOnly SameSite=Strict cookie from ?token= that then carries assets and API calls', async () => {
    const page = await fetch(server.url);
    expect(page.status).toBe(200);
    expect(await page.text()).toContain('Skein test page');
    const cookie = page.headers.get('set-cookie') ?? '';
    expect(cookie).toMatch(/HttpOnly/);
    expect(cookie).toMatch(/SameSite=Strict/);
    expect(cookie).toMatch(/Path=\//);
    const pair = cookie.split(';')[0];
    const asset = await fetch(`${server.origin}/assets/app.js`, { headers: { cookie: pair } });
    expect(asset.status).toBe(200);
    const api = await fetch(`${server.origin}/api/fs.roots`, { method: 'POST', headers: { cookie: pair }, body: '{}' });
    expect(await api.json()).toEqual({ ok: true, value: [root] });
  });

  it('does not accept ?token= on an API request (the token must not travel in API URLs)', async () => {
    const r = await fetch(`${server.origin}/api/fs.roots?token=${server.token}`, { method: 'POST', body: '{}' });
    expect(r.status).toBe(401);
  });
});

describe('Host and Origin', () => {
  it('refuses a foreign Host (DNS rebinding) with 403 even with the right token', async () => {
    const r = await rawRequest(server.port, { method: 'POST', path: '/api/fs.roots', headers: { host: `evil.example:${server.port}`, 'x-skein-token': server.token }, body: '{}' });
    expect(r.status).toBe(403);
  });

  it('refuses the right name on another port', async () => {
    const r = await rawRequest(server.port, { path: `/?token=${server.token}`, headers: { host: `127.0.0.1:${server.port + 1}` } });
    expect(r.status).toBe(403);
  });

  it('accepts localhost:PORT as Host', async () => {
    const r = await rawRequest(server.port, { method: 'POST', path: '/api/fs.roots', headers: { host: `localhost:${server.port}`, 'x-skein-token': server.token }, body: '{}' });
    expect(r.status).toBe(200);
    expect(JSON.parse(r.body)).toEqual({ ok: true, value: [root] });
  });

  it('refuses a foreign Origin with 403 and accepts our own', async () => {
    expect((await call('fs.roots', {}, { origin: 'http://evil.example' })).status).toBe(403);
    expect((await call('fs.roots', {}, { origin: 'null' })).status).toBe(403);
    expect((await call('fs.roots', {}, { origin: `http://127.0.0.1:${server.port + 1}` })).status).toBe(403);
    expect((await call('fs.roots', {}, { origin: server.origin })).status).toBe(200);
  });
});

describe('request bodies', () => {
  it('answers an oversized body with 400 and keeps serving', async () => {
    const big = JSON.stringify({ dir: 'x'.repeat(2 << 20) });
    const r = await call('fs.list', JSON.parse(big));
    expect(r.status).toBe(400);
    expect(await r.text()).toMatch(/larger than 1048576 bytes/);
    const next = await call('fs.roots', {});
    expect(await next.json()).toEqual({ ok: true, value: [root] });
  });

  it('answers a 100 MB body from its Content-Length, so the client reads the 400 (issue 10)', async () => {
    const body = Buffer.alloc(100 << 20, 0x20);
    const r = await fetch(`${server.origin}/api/fs.list`, { method: 'POST', headers: { 'content-type': 'application/json', 'x-skein-token': server.token }, body });
    expect(r.status).toBe(400);
    expect(await r.text()).toMatch(/larger than 1048576 bytes/);
    expect((await call('fs.roots', {})).status).toBe(200);
  });

  it('answers a malformed body with 400 and keeps serving', async () => {
    const r = await fetch(`${server.origin}/api/fs.roots`, { method: 'POST', headers: { 'x-skein-token': server.token }, body: '{"unclosed": ' });
    expect(r.status).toBe(400);
    expect(await r.text()).toMatch(/not JSON/);
    expect((await call('fs.roots', {})).status).toBe(200);
  });

  it('honours a smaller maxBodyBytes', async () => {
    const small = await startServer({ roots: [root], rendererDir: renderer, dataDir: path.join(tmp, 'data'), maxBodyBytes: 64 });
    try {
      const body = JSON.stringify({ dir: root + '/' + 'a'.repeat(100) });
      const r = await fetch(`${small.origin}/api/fs.list`, { method: 'POST', headers: { 'x-skein-token': small.token }, body });
      expect(r.status).toBe(400);
      const ok = await fetch(`${small.origin}/api/fs.roots`, { method: 'POST', headers: { 'x-skein-token': small.token }, body: '{}' });
      expect(ok.status).toBe(200);
    } finally {
      await small.close();
    }
  });

  it('returns validation failures as an error envelope naming the field', async () => {
    const r = await call('fs.list', { dir: root, extra: 1 });
    const env = await r.json();
    expect(env.ok).toBe(false);
    expect(env.error.code).toBe('request');
    const unknown = await (await call('no.such.request', {})).json();
    expect(unknown).toMatchObject({ ok: false, error: { code: 'request', where: 'method' } });
  });

  it('refuses GET on the API with 405', async () => {
    const r = await fetch(`${server.origin}/api/fs.roots`, { headers: { 'x-skein-token': server.token } });
    expect(r.status).toBe(405);
  });
});

describe('path confinement', () => {
  it('refuses probes.inspect on /etc with the clear error', async () => {
    const env = await (await call('probes.inspect', { probes: '/etc' })).json();
    expect(env.ok).toBe(false);
    expect(env.error).toMatchObject({ code: 'request', file: '/etc', where: 'probes' });
    expect(env.error.message).toMatch(/outside the folders Skein may use/);
  });

  it('runs a real core request on a model inside a root', async () => {
    const model = path.join(root, 'tiny.onnx');
    fs.writeFileSync(model, buildModel({
      name: 'tiny', inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', 2] }], outputs: [{ name: 'y', elemType: 'float32', dims: ['batch', 2] }],
      initializers: [], nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }],
    }));
    const env = await (await call('model.layers', { model })).json();
    expect(env.ok).toBe(true);
    // The graph has one node, so its one output is the only capturable tensor (Relu y of shape [batch, 2]).
    expect(JSON.stringify(env.value)).toContain('"y"');
    const outside = await (await call('model.layers', { model: path.join(tmp, 'secret.txt') })).json();
    expect(outside).toMatchObject({ ok: false, error: { code: 'request', where: 'model' } });
  });
});

describe('static files', () => {
  const withCookie = async () => ({ cookie: ((await fetch(server.url)).headers.get('set-cookie') ?? '').split(';')[0] });

  it('serves the page and assets with their content types, CSP and nosniff', async () => {
    const headers = await withCookie();
    const page = await fetch(`${server.origin}/`, { headers });
    expect(page.headers.get('content-type')).toBe('text/html; charset=utf-8');
    expect(page.headers.get('content-security-policy')).toBe(CONTENT_SECURITY_POLICY);
    expect(CONTENT_SECURITY_POLICY).toBe("default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data: blob:; connect-src 'self'; object-src 'none'; frame-ancestors 'none'; base-uri 'none'");
    expect(page.headers.get('x-content-type-options')).toBe('nosniff');
    expect((await fetch(`${server.origin}/assets/app.js`, { headers })).headers.get('content-type')).toBe('text/javascript; charset=utf-8');
    expect((await fetch(`${server.origin}/assets/look.css`, { headers })).headers.get('content-type')).toBe('text/css; charset=utf-8');
    const api = await call('fs.roots', {});
    expect(api.headers.get('content-security-policy')).toBe(CONTENT_SECURITY_POLICY);
    expect(api.headers.get('content-type')).toBe('application/json; charset=utf-8');
  });

  it.each([
    '/../secret.txt', '/%2e%2e/secret.txt', '/%2E%2E/secret.txt', '/..%2fsecret.txt', '/%2e%2e%2fsecret.txt',
    '/assets/..%2f..%2fsecret.txt', '/..%5csecret.txt', '/linked-secret.txt', '/%00index.html', '/../package.json',
  ])('does not leave the renderer folder for %s', async (p) => {
    const r = await rawRequest(server.port, { path: p, headers: { host: `127.0.0.1:${server.port}`, 'x-skein-token': server.token } });
    expect([403, 404, 400]).toContain(r.status);
    expect(r.body).not.toContain('TOP-SECRET');
    expect(r.body).not.toContain('"name": "skein"');
  });

  it('answers a missing file with 404, and a missing favicon with 204 (no console error for an icon never asked for)', async () => {
    const headers = await withCookie();
    expect((await fetch(`${server.origin}/nothing-here.js`, { headers })).status).toBe(404);
    expect((await fetch(`${server.origin}/favicon.ico`, { headers })).status).toBe(204);
    expect((await fetch(`${server.origin}/favicon.ico`)).status).toBe(401);
  });

  it('tells the user to build the renderer when the build is missing', async () => {
    const bare = await startServer({ roots: [root], rendererDir: path.join(tmp, 'no-build'), dataDir: path.join(tmp, 'data') });
    try {
      const r = await fetch(bare.url);
      expect(r.status).toBe(503);
      expect(await r.text()).toContain('npm run build:renderer');
    } finally {
      await bare.close();
    }
  });
});

describe('binding', () => {
  it('listens on 127.0.0.1 only', async () => {
    expect(server.origin).toBe(`http://127.0.0.1:${server.port}`);
    const nets = Object.values(os.networkInterfaces()).flat().filter((n) => n && n.family === 'IPv4' && !n.internal);
    for (const n of nets) {
      await expect(fetch(`http://${n!.address}:${server.port}/`)).rejects.toThrow(/fetch failed/); // refused: nothing listens there
    }
  });
});
