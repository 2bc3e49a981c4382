/**
 * Serving the built renderer, shared by both transports: browser mode (app/server) and the Electron window's
 * own protocol (app/main). Same policy, same confinement, same content types.
 */
import fs from 'node:fs';
import path from 'node:path';
import { isInside } from '../../core/fs/index.ts';

export const CONTENT_SECURITY_POLICY = [
  "default-src 'self'", "script-src 'self'",
  "style-src 'self' 'unsafe-inline'", // plotly writes inline styles
  "img-src 'self' data: blob:", "connect-src 'self'", "object-src 'none'", "frame-ancestors 'none'", "base-uri 'none'",
].join('; ');

export const SECURITY_HEADERS: Readonly<Record<string, string>> = {
  'Content-Security-Policy': CONTENT_SECURITY_POLICY,
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer', // the browser-mode page URL carries the token
  'Cross-Origin-Opener-Policy': 'same-origin',
  'Cross-Origin-Resource-Policy': 'same-origin',
  'X-Frame-Options': 'DENY',
};

const CONTENT_TYPES: Readonly<Record<string, string>> = {
  '.html': 'text/html; charset=utf-8', '.js': 'text/javascript; charset=utf-8', '.mjs': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8', '.json': 'application/json; charset=utf-8', '.map': 'application/json; charset=utf-8',
  '.svg': 'image/svg+xml', '.png': 'image/png', '.jpg': 'image/jpeg', '.jpeg': 'image/jpeg', '.gif': 'image/gif',
  '.webp': 'image/webp', '.ico': 'image/x-icon', '.woff': 'font/woff', '.woff2': 'font/woff2', '.ttf': 'font/ttf',
  '.wasm': 'application/wasm', '.txt': 'text/plain; charset=utf-8',
};

export const contentTypeOf = (file: string): string => CONTENT_TYPES[path.extname(file).toLowerCase()] ?? 'application/octet-stream';

export const MISSING_BUILD_PAGE = `<!doctype html><meta charset="utf-8"><title>Skein</title>
<p>The Skein screens have not been built yet. Run <code>npm run build:renderer</code> in the Skein folder, then reload this page.</p>\n`;

/** Maps a URL path onto a file inside rendererDir, or null when it would leave it (also through links) or is no file. */
export function resolveStaticFile(rendererDir: string, urlPath: string): string | null {
  let decoded: string;
  try {
    decoded = decodeURIComponent(urlPath);
  } catch {
    return null;
  }
  if (decoded.includes('\0') || decoded.includes('\\')) return null;
  const rel = decoded === '/' || decoded === '' ? 'index.html' : decoded.replace(/^\/+/, '');
  const root = path.resolve(rendererDir);
  const full = path.resolve(root, rel);
  if (!isInside(root, full)) return null;
  try {
    const real = fs.realpathSync(full);
    return fs.statSync(real).isFile() ? real : null;
  } catch {
    return null;
  }
}
