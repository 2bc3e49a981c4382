/**
 * `npm run electron:sqlite`: builds better-sqlite3 for the installed Electron into app/main/native/, leaving Node's
 * own build in node_modules untouched (the CLI and the tests use that one). Works on a copy of the package:
 *   1. prebuild-install --runtime electron (downloads the matching prebuilt binary from the package's releases);
 *   2. else node-gyp rebuild against Electron's headers (needs a C++ toolchain and the headers download).
 * Both need network access beyond the npm registry; without it the script stops with a message saying so.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { spawnSync } from 'node:child_process';
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { writeFileDurably } from '../../core/fs/index.ts';
import { NATIVE_DIR, BINDING_FILE, INFO_FILE, type NativeInfo } from './native.ts';

const require = createRequire(import.meta.url);
const ELECTRON_HEADERS = 'https://electronjs.org/headers';

function packageDir(name: string): string {
  return path.dirname(require.resolve(`${name}/package.json`));
}

/** The package without its build output: sources, gyp file, bundled SQLite amalgamation. */
function copyPackage(from: string, to: string): void {
  fs.cpSync(from, to, { recursive: true, filter: (src) => path.relative(from, src).split(path.sep)[0] !== 'build' });
}

/** npm hands its config to children as npm_config_*; a `nodedir` there makes node-gyp build against Node, not Electron. */
function cleanEnv(): NodeJS.ProcessEnv {
  const env = { ...process.env };
  for (const key of Object.keys(env)) {
    if (/^npm_config_(nodedir|target|runtime|disturl|dist_url|arch|platform|build_from_source|devdir)$/i.test(key)) delete env[key];
  }
  return env;
}

function run(label: string, command: string, args: string[], cwd: string): boolean {
  process.stderr.write(`electron:sqlite: ${label}…\n`);
  const r = spawnSync(command, args, { cwd, stdio: ['ignore', 'inherit', 'inherit'], timeout: 15 * 60_000, env: cleanEnv() });
  return r.status === 0;
}

/** A Node addon names its ABI in its registration symbol (node_register_module_v<ABI>); checked so a wrong build is never installed. */
export function addonAbi(file: string): string | null {
  const m = /node_register_module_v(\d+)/.exec(fs.readFileSync(file).toString('latin1'));
  return m ? m[1] : null;
}

function nodeGypScript(): string | null {
  try {
    return require.resolve('node-gyp/bin/node-gyp.js');
  } catch {
    // npm ships node-gyp in its own folder: <prefix>/lib/node_modules/npm/node_modules/node-gyp
    const npmRoot = spawnSync('npm', ['root', '-g'], { encoding: 'utf8' }).stdout?.trim();
    const candidate = npmRoot ? path.join(npmRoot, 'npm', 'node_modules', 'node-gyp', 'bin', 'node-gyp.js') : '';
    return candidate && fs.existsSync(candidate) ? candidate : null;
  }
}

export function buildElectronSqlite(): number {
  const electronDir = packageDir('electron');
  const electron = (JSON.parse(fs.readFileSync(path.join(electronDir, 'package.json'), 'utf8')) as { version: string }).version;
  const modules = fs.readFileSync(path.join(electronDir, 'abi_version'), 'utf8').trim();
  const { platform, arch } = process;
  const work = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-electron-sqlite-'));
  const pkg = path.join(work, 'better-sqlite3');
  try {
    copyPackage(packageDir('better-sqlite3'), pkg);
    let method = 'prebuild-install';
    let ok = run(`fetching the prebuilt better-sqlite3 for Electron ${electron} (ABI ${modules}, ${platform}-${arch})`, process.execPath,
      [path.join(packageDir('prebuild-install'), 'bin.js'), '--runtime', 'electron', '--target', electron, '--arch', arch, '--platform', platform, '--verbose'], pkg);
    if (!ok) {
      const gyp = nodeGypScript();
      method = 'node-gyp';
      ok = gyp !== null && run(`compiling better-sqlite3 against Electron ${electron} headers`, process.execPath,
        [gyp, 'rebuild', '--release', `--target=${electron}`, `--arch=${arch}`, `--dist-url=${ELECTRON_HEADERS}`], pkg);
    }
    const built = path.join(pkg, 'build', 'Release', BINDING_FILE);
    const abi = ok && fs.existsSync(built) ? addonAbi(built) : null;
    if (ok && abi !== null && abi !== modules) {
      process.stderr.write(`electron:sqlite: the build came out for ABI ${abi}, not Electron's ${modules} (a nodedir or target setting in your npm config?); not installed.\n`);
      return 1;
    }
    if (!ok || !fs.existsSync(built)) {
      process.stderr.write(
        `electron:sqlite: could not get better-sqlite3 for Electron ${electron} (ABI ${modules}, ${platform}-${arch}).\n` +
        `  Both ways need network access beyond the npm registry: the prebuilt binary comes from the package's GitHub releases,\n` +
        `  the source build needs Electron's headers from ${ELECTRON_HEADERS} and a C++ toolchain (python3, make, a C++ compiler).\n` +
        `  Run this again on a machine with that access; the Skein CLI and browser mode (npm start -- --browser) work without it.\n`);
      return 1;
    }
    fs.mkdirSync(NATIVE_DIR, { recursive: true });
    const info: NativeInfo = { electron, modules, platform, arch, builtAt: new Date().toISOString(), method };
    // Binary first, then the note that vouches for it, each written durably: a half-copied binary is never described as good.
    const target = path.join(NATIVE_DIR, BINDING_FILE);
    writeFileDurably(target, fs.readFileSync(built));
    writeFileDurably(path.join(NATIVE_DIR, INFO_FILE), JSON.stringify(info, null, 1) + '\n');
    process.stderr.write(`electron:sqlite: wrote ${target} (${method}, Electron ${electron}, ABI ${modules}).\n`);
    return 0;
  } finally {
    fs.rmSync(work, { recursive: true, force: true });
  }
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) process.exitCode = buildElectronSqlite();
