/**
 * Browser mode: the one API and the built renderer over loopback HTTP (node:http, no framework: five routes do
 * not need one). Same wire format as Electron IPC (see notes/APP.md):
 *   POST /api/<method>, JSON body (empty body = {}), token in header `x-skein-token` or the session cookie
 *   → 200 `{ok:true,value}` or 200 `{ok:false,error}` for every request the API answered, including refusals
 *     (unknown method, invalid body, path outside the roots): the envelope is the answer, as over IPC.
 *   Transport failures answer with a status and a plain-text reason: 400 body not JSON / too large / bad URL,
 *   401 no or wrong token, 403 wrong Host (DNS rebinding) or foreign Origin, 404 no such file, 405 wrong verb.
 * Everything else is a GET for a static file of the renderer build.
 */
import http from 'node:http';
import fs from 'node:fs';
import path from 'node:path';
import crypto from 'node:crypto';
import { createApi, dispatch, toErrorInfo, type ApiContext } from '../../core/api/index.ts';
import { SECURITY_HEADERS, MISSING_BUILD_PAGE, contentTypeOf, resolveStaticFile } from './static.ts';

export { CONTENT_SECURITY_POLICY } from './static.ts';

export interface ServerOptions {
  /** 0 or unset: a free port chosen by the system. */
  port?: number;
  /** Folders every path in a request must lie in. */
  roots: string[];
  /** The built renderer (app/renderer/dist). */
  rendererDir: string;
  /** Unset: 24 random bytes, base64url, new for every launch. */
  token?: string;
  /** The user's data folder (demo study). */
  dataDir: string;
  /** Largest accepted request body; default 1 MiB. */
  maxBodyBytes?: number;
}

export interface RunningServer {
  /** http://127.0.0.1:PORT/?token=... — the one URL to open. */
  url: string;
  /** http://127.0.0.1:PORT */
  origin: string;
  token: string;
  port: number;
  close(): Promise<void>;
}

export const TOKEN_HEADER = 'x-skein-token';
export const TOKEN_COOKIE = 'skein_token';
const DEFAULT_MAX_BODY = 1 << 20;

/** Constant-time comparison; hashing first makes both sides the same length. */
function tokenMatches(given: string | undefined, token: string): boolean {
  if (typeof given !== 'string' || given.length === 0) return false;
  const a = crypto.createHash('sha256').update(given).digest();
  const b = crypto.createHash('sha256').update(token).digest();
  return crypto.timingSafeEqual(a, b);
}

function cookieValue(header: string | undefined, name: string): string | undefined {
  for (const part of (header ?? '').split(';')) {
    const eq = part.indexOf('=');
    if (eq > 0 && part.slice(0, eq).trim() === name) return part.slice(eq + 1).trim();
  }
  return undefined;
}

function send(res: http.ServerResponse, status: number, body: string | Buffer, type: string, extra: Record<string, string> = {}): void {
  res.writeHead(status, { ...SECURITY_HEADERS, 'Content-Type': type, 'Content-Length': String(Buffer.byteLength(body)), 'Cache-Control': 'no-store', ...extra });
  res.end(body);
}

const sendText = (res: http.ServerResponse, status: number, text: string, extra: Record<string, string> = {}): void =>
  send(res, status, text + '\n', 'text/plain; charset=utf-8', extra);

/** Collects the body up to maxBytes. Past the limit the rest is read and dropped so the connection stays usable. */
function readBody(req: http.IncomingMessage, maxBytes: number): Promise<Buffer | 'too-large'> {
  return new Promise((resolve, reject) => {
    const declared = Number(req.headers['content-length'] ?? 0);
    const chunks: Buffer[] = [];
    let size = 0;
    let tooLarge = declared > maxBytes;
    req.on('data', (chunk: Buffer) => {
      size += chunk.length;
      if (size > maxBytes) tooLarge = true;
      if (!tooLarge) chunks.push(chunk);
      // A client that keeps sending far past the limit is cut off rather than drained forever.
      else if (size > 16 * maxBytes) req.destroy();
    });
    req.on('end', () => resolve(tooLarge ? 'too-large' : Buffer.concat(chunks)));
    req.on('error', reject);
    req.on('close', () => { if (!req.complete) resolve('too-large'); });
  });
}

/** A refused body is read and dropped (so the client, still sending, reads the answer) up to a cap, then cut. */
const DRAIN_LIMIT = 1 << 30;
function drain(req: http.IncomingMessage, limit: number): void {
  let seen = 0;
  req.on('data', (chunk: Buffer) => {
    seen += chunk.length;
    if (seen > limit) req.destroy();
  });
  req.on('error', () => {});
}

export async function startServer(opts: ServerOptions): Promise<RunningServer> {
  const token = opts.token ?? crypto.randomBytes(24).toString('base64url');
  const maxBody = opts.maxBodyBytes ?? DEFAULT_MAX_BODY;
  const ctx: ApiContext = { allowedRoots: opts.roots.map((r) => path.resolve(r)), dataDir: path.resolve(opts.dataDir) };
  const api = createApi(ctx);
  const rendererDir = path.resolve(opts.rendererDir);
  let port = 0;

  const handle = async (req: http.IncomingMessage, res: http.ServerResponse): Promise<void> => {
    // DNS rebinding: a foreign name that resolves to 127.0.0.1 still carries its own Host header.
    const host = (req.headers.host ?? '').toLowerCase();
    if (host !== `127.0.0.1:${port}` && host !== `localhost:${port}`) return sendText(res, 403, 'Forbidden: unexpected Host header.');
    const origin = req.headers.origin;
    if (origin !== undefined && origin !== `http://127.0.0.1:${port}` && origin !== `http://localhost:${port}`) {
      return sendText(res, 403, 'Forbidden: requests from other sites are refused.');
    }
    let url: URL;
    try {
      url = new URL(req.url ?? '/', `http://${host}`);
    } catch {
      return sendText(res, 400, 'Bad request URL.');
    }
    const queryToken = url.searchParams.get('token') ?? undefined;
    const headerToken = req.headers[TOKEN_HEADER];
    const given = typeof headerToken === 'string' ? headerToken : cookieValue(req.headers.cookie, TOKEN_COOKIE) ?? (req.method === 'GET' ? queryToken : undefined);
    // A page opened with ?token= gets a cookie, so its scripts, styles and images load without the token in their URLs.
    const tokenFromQuery = req.method === 'GET' && tokenMatches(queryToken, token);
    if (!tokenFromQuery && !tokenMatches(given, token)) return sendText(res, 401, 'Unauthorized: open the URL Skein printed at start (it carries the session token).');
    const cookie: Record<string, string> = tokenFromQuery ? { 'Set-Cookie': `${TOKEN_COOKIE}=${token}; HttpOnly; SameSite=Strict; Path=/` } : {};

    if (url.pathname.startsWith('/api/')) {
      if (req.method !== 'POST') return sendText(res, 405, 'Method not allowed: API requests are POST.', { Allow: 'POST' });
      let method: string;
      try {
        method = decodeURIComponent(url.pathname.slice('/api/'.length));
      } catch {
        return sendText(res, 400, 'Bad request URL.');
      }
      // Answer a declared oversize body at once, before reading it: the client gets the 400 instead of a reset.
      const declared = Number(req.headers['content-length']);
      if (Number.isFinite(declared) && declared > maxBody) {
        sendText(res, 400, `Bad request: the body is larger than ${maxBody} bytes.`, { Connection: 'close' });
        drain(req, DRAIN_LIMIT);
        return;
      }
      const raw = await readBody(req, maxBody);
      if (raw === 'too-large') return sendText(res, 400, `Bad request: the body is larger than ${maxBody} bytes.`, { Connection: 'close' });
      let body: unknown;
      try {
        body = raw.length === 0 ? {} : JSON.parse(raw.toString('utf8'));
      } catch {
        return sendText(res, 400, 'Bad request: the body is not JSON.');
      }
      let envelope: unknown;
      try {
        envelope = { ok: true, value: await dispatch(api, ctx, method, body) };
      } catch (e) {
        envelope = { ok: false, error: toErrorInfo(e) };
      }
      return send(res, 200, JSON.stringify(envelope), 'application/json; charset=utf-8', cookie);
    }

    if (req.method !== 'GET' && req.method !== 'HEAD') return sendText(res, 405, 'Method not allowed.', { Allow: 'GET, HEAD' });
    if (url.pathname === '/' && !fs.existsSync(path.join(rendererDir, 'index.html'))) {
      return send(res, 503, MISSING_BUILD_PAGE, 'text/html; charset=utf-8', cookie);
    }
    const file = resolveStaticFile(rendererDir, url.pathname);
    // Browsers ask for an icon on their own; "no icon" is not an error worth a red line in the console.
    if (!file && url.pathname === '/favicon.ico') {
      res.writeHead(204, { ...SECURITY_HEADERS, 'Cache-Control': 'no-cache' });
      return void res.end();
    }
    if (!file) return sendText(res, 404, 'Not found.', cookie);
    const content = fs.readFileSync(file);
        res.writeHead(200, { ...SECURITY_HEADERS, 'Content-Type': contentTypeOf(file), 'Content-Length': String(content.length), 'Cache-Control': 'no-cache', ...cookie });
    res.end(req.method === 'HEAD' ? undefined : content);
  };

  const server = http.createServer((req, res) => {
    handle(req, res).catch((e) => {
      process.stderr.write(`skein server: ${(e as Error)?.stack ?? String(e)}\n`);
      if (!res.headersSent) sendText(res, 500, 'Internal error; see the terminal Skein runs in.');
      else res.destroy();
    });
  });
  server.on('clientError', (_e, socket) => { if (socket.writable) socket.end('HTTP/1.1 400 Bad Request\r\nConnection: close\r\n\r\n'); else socket.destroy(); });

  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(opts.port ?? 0, '127.0.0.1', () => { server.off('error', reject); resolve(); });
  });
  port = (server.address() as import('node:net').AddressInfo).port;
  const origin = `http://127.0.0.1:${port}`;
  return {
    url: `${origin}/?token=${token}`, origin, token, port,
    close: () => new Promise<void>((resolve, reject) => {
      server.close((e) => (e ? reject(e) : resolve()));
      server.closeAllConnections();
    }),
  };
}
