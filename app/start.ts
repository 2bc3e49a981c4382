/**
 * `npm start [-- --browser] [--no-open] [--port N] [FOLDER...]`: the desktop app where Electron can run, else browser
 * mode (the same screens and API over loopback HTTP, see app/server). In browser mode the folders named on the
 * command line are added to the folders Skein may read and write (with the demo data and the user's data folder);
 * in the desktop app they, and any model, probe-set folder or study named, are opened.
 * SKEIN_RENDERER_DIR points at another renderer build (tests, packaged builds); SKEIN_HOME at another data folder.
 */
import fs from 'node:fs';
import path from 'node:path';
import { spawn, spawnSync } from 'node:child_process';
import { createRequire } from 'node:module';
import { fileURLToPath } from 'node:url';
import { parseArgs } from 'node:util';
import { defaultDataDir, sampleDataDir } from '../core/api/files.ts';
import { startServer } from './server/index.ts';
import { findElectronSqlite, type Runtime } from './main/native.ts';

const require = createRequire(import.meta.url);
const repo = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

export interface StartOptions { browser: boolean; open: boolean; port: number; paths: string[] }

export function parseStartArgs(argv: string[]): StartOptions {
  const { values, positionals } = parseArgs({
    args: argv, allowPositionals: true, strict: true,
    options: { browser: { type: 'boolean', default: false }, 'no-open': { type: 'boolean', default: false }, port: { type: 'string', default: '0' } },
  });
  const port = Number(values.port);
  if (!Number.isInteger(port) || port < 0 || port > 65535) throw new Error(`--port needs a whole number from 0 to 65535 (0 = any free port), not "${values.port}".`);
  return { browser: values.browser, open: !values['no-open'], port, paths: positionals.map((p) => path.resolve(p)) };
}

/**
 * The Electron executable when it is installed and can run here, else why not. Reads electron's path.txt instead of
 * require('electron'), which would try to download a missing binary.
 */
export function electronBinary(env: NodeJS.ProcessEnv = process.env): { exe: string } | { reason: string } {
  let dir: string;
  try {
    dir = path.dirname(require.resolve('electron/package.json'));
  } catch {
    return { reason: 'the electron package is not installed' };
  }
  const pathTxt = path.join(dir, 'path.txt');
  if (!fs.existsSync(pathTxt)) return { reason: 'its binary was never downloaded: node_modules/electron/path.txt is missing' };
  const rel = fs.readFileSync(pathTxt, 'utf8').trim();
  const exe = env.ELECTRON_OVERRIDE_DIST_PATH ? path.join(env.ELECTRON_OVERRIDE_DIST_PATH, rel) : path.join(dir, 'dist', rel);
  try {
    fs.accessSync(exe, fs.constants.X_OK);
  } catch {
    return { reason: `its binary ${exe} is missing or not executable` };
  }
  if (process.platform === 'linux' && !env.DISPLAY && !env.WAYLAND_DISPLAY) return { reason: 'there is no display: DISPLAY and WAYLAND_DISPLAY are unset' };
  return { exe };
}

/** The runtime the installed Electron gives its native addons (its ABI from electron's abi_version file). */
export function electronRuntime(): Runtime {
  const dir = path.dirname(require.resolve('electron/package.json'));
  return {
    modules: fs.readFileSync(path.join(dir, 'abi_version'), 'utf8').trim(), platform: process.platform, arch: process.arch,
    electron: (JSON.parse(fs.readFileSync(path.join(dir, 'package.json'), 'utf8')) as { version: string }).version,
  };
}

function openBrowser(url: string): void {
  const [cmd, args] = process.platform === 'darwin' ? ['open', [url]]
    : process.platform === 'win32' ? ['cmd', ['/c', 'start', '""', url]]
    : ['xdg-open', [url]];
  const child = spawn(cmd, args as string[], { detached: true, stdio: 'ignore' });
  child.on('error', () => process.stderr.write('Could not open a browser; open the URL above yourself.\n'));
  child.unref();
}

function ensureRendererBuild(rendererDir: string, overridden: boolean): void {
  if (fs.existsSync(path.join(rendererDir, 'index.html')) || overridden) return;
  process.stderr.write('The screens are not built yet; running `npm run build:renderer`…\n');
  // Build output goes to stderr so stdout keeps only the lines a script may read (notice, URL).
  const r = spawnSync('npm', ['run', 'build:renderer'], { cwd: repo, stdio: ['ignore', process.stderr, process.stderr], shell: process.platform === 'win32' });
  if (r.status !== 0) process.stderr.write('Building the screens failed (see above); the page will say how to build them.\n');
}

async function browserMode(opts: StartOptions, notice: string | null): Promise<void> {
  if (notice) process.stdout.write(`${notice}\n`);
  const overridden = !!process.env.SKEIN_RENDERER_DIR;
  const rendererDir = path.resolve(process.env.SKEIN_RENDERER_DIR || path.join(repo, 'app', 'renderer', 'dist'));
  ensureRendererBuild(rendererDir, overridden);
  const dataDir = defaultDataDir();
  fs.mkdirSync(dataDir, { recursive: true });
  const named = opts.paths.map((p) => {
    if (!fs.existsSync(p)) throw new Error(`${p} does not exist; name folders Skein may use.`);
    return fs.statSync(p).isDirectory() ? p : path.dirname(p);
  });
  const roots = [...new Set([sampleDataDir(), dataDir, ...named])];
  const server = await startServer({ port: opts.port, roots, rendererDir, dataDir });
  process.stderr.write(`Skein in browser mode; it may use: ${roots.join(', ')}. Open this URL (it carries this session's key):\n`);
  process.stdout.write(`${server.url}\n`);
  process.stderr.write('Press Ctrl-C to stop.\n');
  if (opts.open) openBrowser(server.url);
  let stopping = false;
  const stop = (): void => {
    if (stopping) return;
    stopping = true;
    server.close().then(() => {
      process.stderr.write('Skein stopped.\n');
      process.exit(0);
    }, () => process.exit(1));
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
}

function desktopMode(exe: string, opts: StartOptions): void {
  const child = spawn(exe, [path.join(repo, 'app', 'main', 'entry.mjs'), ...opts.paths], { stdio: 'inherit' });
  // Ctrl-C reaches Electron too (same process group); SIGTERM from a supervisor is passed on.
  process.on('SIGINT', () => {});
  process.on('SIGTERM', () => child.kill('SIGTERM'));
  child.on('exit', (code, signal) => process.exit(code ?? (signal ? 1 : 0)));
}

export async function main(argv: string[]): Promise<void> {
  const opts = parseStartArgs(argv);
  if (opts.browser) return browserMode(opts, null);
  const electron = electronBinary();
  if ('exe' in electron) {
    // Without its own better-sqlite3 the desktop app could only show an error; browser mode works with Node's build.
    const native = findElectronSqlite(electronRuntime());
    if ('binding' in native) return desktopMode(electron.exe, opts);
    return browserMode(opts, `Electron cannot open studies yet (run \`npm run electron:sqlite\` once); falling back to browser mode.`);
  }
  return browserMode(opts, `Electron is not available here (${electron.reason}); falling back to browser mode.`);
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main(process.argv.slice(2)).catch((e) => {
    process.stderr.write(`skein start: ${(e as Error).message}\n`);
    process.exit(2);
  });
}
