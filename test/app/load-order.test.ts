/**
 * Every core/api module loads first on its own in a fresh process. An import cycle made loading core/api/review.ts
 * first throw "ReferenceError: Cannot access 'reviewRequests' before initialization"; test/layering.test.ts forbids
 * cycles statically, this checks the modules as Node actually loads them.
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

const root = path.resolve(import.meta.dirname, '../..');

describe('core/api load order', () => {
  const modules = ['core/api/contract.ts', 'core/api/context.ts', 'core/api/review.ts', 'core/api/files.ts', 'core/api/screens/index.ts', 'core/api/index.ts'];

  it.each(modules)('%s loads first without error', (m) => {
    expect(fs.existsSync(path.join(root, m))).toBe(true);
    const r = spawnSync(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', `await import(${JSON.stringify(path.join(root, m))}); console.log('loaded');`], { cwd: root, encoding: 'utf8' });
    expect(r.stderr).toBe('');
    expect(r.stdout.trim()).toBe('loaded');
  }, 60_000);
});
