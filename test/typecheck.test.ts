/**
 * The TypeScript compiler and svelte-check over the whole project: a type error anywhere fails CI.
 * (Common practice, no source: types are checked, not only stripped, before code lands.)
 */
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

const root = path.resolve(import.meta.dirname, '..');
const bin = (name: string) => path.join(root, 'node_modules/.bin', name);

describe('type checks', () => {
  it('tsc --noEmit passes', () => {
    const r = spawnSync(bin('tsc'), ['--noEmit', '-p', root], { encoding: 'utf8', cwd: root });
    expect(r.stdout + r.stderr).toBe('');
    expect(r.status).toBe(0);
  }, 300_000);

  it('svelte-check passes on the renderer', () => {
    const r = spawnSync(bin('svelte-check'), ['--workspace', path.join(root, 'app/renderer'), '--output', 'machine', '--fail-on-warnings'], { encoding: 'utf8', cwd: root });
    const problems = r.stdout.split('\n').filter((l) => /\s(ERROR|WARNING)\s/.test(l));
    expect(problems).toEqual([]);
    expect(r.status).toBe(0);
  }, 300_000);
});
