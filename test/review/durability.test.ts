/**
 * Every acknowledged edit survives a hard kill, and two writers lose no update. Real child processes editing a
 * real study file through the API: one is SIGKILLed right after an acknowledgement while it keeps editing; two
 * others edit the same unit at once. (That a committed SQLite transaction with synchronous=FULL survives the process
 * is SQLite's documented guarantee; the test checks Skein acknowledges only after the commit.)
 */
import { spawn } from 'node:child_process';
import path from 'node:path';
import Database from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, toErrorInfo } from '../../core/api/index.ts';
import type { Annotation, ReviewConflictInfo } from '../../core/api/review.ts';
import { tempDir } from '../support/fixtures.ts';
import { bareStudy } from './helpers.ts';

const child = path.resolve(import.meta.dirname, 'child.ts');
const root = path.resolve(import.meta.dirname, '../..');

function start(args: string[]) {
  return spawn(process.execPath, ['--import', 'tsx', child, ...args], { cwd: root, stdio: ['ignore', 'pipe', 'pipe'] });
}

describe('durable edits', () => {
  let dir: string;
  beforeAll(() => {
    dir = tempDir('skein-durable-');
  });

  it('keeps every acknowledged edit when the editing process is SIGKILLed right after an acknowledgement', async () => {
    const study = bareStudy(path.join(dir, 'killed.study'), [{ name: 'hidden', units: 7 }]);
    const proc = start(['ack', study, 'hidden']);
    let stderr = '';
    proc.stderr.on('data', (d) => { stderr += d; });
    const acks: { i: number; unit: number; version: number }[] = [];
    const exited = new Promise<NodeJS.Signals | null>((resolve) => proc.on('exit', (_c, signal) => resolve(signal)));
    let buffered = '';
    await new Promise<void>((resolve) => {
      proc.stdout.on('data', (d: Buffer) => {
        buffered += d.toString();
        let nl;
        while ((nl = buffered.indexOf('\n')) >= 0) {
          const line = buffered.slice(0, nl);
          buffered = buffered.slice(nl + 1);
          const [, i, unit, version] = line.split(' ').map(Number);
          acks.push({ i, unit, version });
          // Kill the moment the 40th acknowledgement arrives; the child is already busy with its next edit.
          if (acks.length === 40) { proc.kill('SIGKILL'); resolve(); }
        }
      });
      proc.on('exit', () => resolve());
    });
    expect(await exited, stderr).toBe('SIGKILL');
    expect(acks.length).toBeGreaterThanOrEqual(40);

    const db = new Database(study);
    try {
      expect(db.pragma('integrity_check', { simple: true })).toBe('ok');
      const notes = new Set(db.prepare(`SELECT json_extract(new_value, '$') FROM annotation_event WHERE field = 'note'`).pluck().all() as string[]);
      for (const a of acks) expect(notes.has(`edit ${a.i}`), `acknowledged edit ${a.i}`).toBe(true);
      // Each unit shows at least its last acknowledged edit (a later one may have committed before the kill).
      for (let unit = 0; unit < 7; unit++) {
        const last = acks.filter((a) => a.unit === unit).at(-1);
        if (!last) continue;
        const row = db.prepare(`SELECT note, version FROM annotation WHERE layer = 'hidden' AND unit = ?`).get(unit) as { note: string; version: number };
        expect(row.version).toBeGreaterThanOrEqual(last.version);
        expect(Number(row.note.split(' ')[1])).toBeGreaterThanOrEqual(last.i);
        // The current row and the history agree: one version per write, one write per acknowledged edit.
        const edits = db.prepare(`SELECT count(DISTINCT edit) FROM annotation_event WHERE layer = 'hidden' AND unit = ?`).pluck().get(unit) as number;
        expect(edits).toBe(row.version);
      }
    } finally {
      db.close();
    }
  });

  it('refuses the second of two edits made on the same version, with the current annotation, and overwrites nothing', async () => {
    const study = bareStudy(path.join(dir, 'two.study'), [{ name: 'hidden', units: 4 }]);
    // Two API instances: two app windows, each opening its own connection per request.
    const one = createApi({});
    const two = createApi({});
    const seen1 = (await one['review.get']({ study, layer: 'hidden', unit: 2 })).annotation;
    const seen2 = (await two['review.get']({ study, layer: 'hidden', unit: 2 })).annotation;
    expect(seen1.version).toBe(seen2.version);
    const won = await one['review.edit']({ study, layer: 'hidden', unit: 2, version: seen1.version, reviewer: 'ana', changes: { note: 'from ana', addTags: ['mixed'] } });
    let info: ReviewConflictInfo | null = null;
    try {
      await two['review.edit']({ study, layer: 'hidden', unit: 2, version: seen2.version, reviewer: 'ben', changes: { note: 'from ben' } });
    } catch (e) {
      info = toErrorInfo(e) as ReviewConflictInfo;
    }
    expect(info?.code).toBe('conflict');
    expect(info?.message).toMatch(/ana changed hidden unit 2 since you loaded it .*nothing was overwritten/);
    expect(info?.current).toEqual(won);
    const now = (await two['review.get']({ study, layer: 'hidden', unit: 2 })).annotation;
    expect(now).toEqual(won);
    expect(now.note).toBe('from ana');
  });

  it('loses no update when two processes append to the same note at the same time', async () => {
    const study = bareStudy(path.join(dir, 'race.study'), [{ name: 'hidden', units: 1 }]);
    const count = 30;
    const run = (name: string) => new Promise<{ code: number | null; out: string; err: string }>((resolve) => {
      const p = start(['append', study, 'hidden', '0', name, String(count)]);
      let out = '';
      let err = '';
      p.stdout.on('data', (d) => { out += d; });
      p.stderr.on('data', (d) => { err += d; });
      p.on('exit', (code) => resolve({ code, out, err }));
    });
    const [a, b] = await Promise.all([run('ana'), run('ben')]);
    expect(a.code, a.err).toBe(0);
    expect(b.code, b.err).toBe(0);
    const final = (await createApi({})['review.get']({ study, layer: 'hidden', unit: 0 })) as { annotation: Annotation; history: unknown[] };
    const lines = final.annotation.note.trim().split('\n');
    const expected = [...Array(count).keys()].flatMap((k) => [`ana-${k}`, `ben-${k}`]);
    expect([...lines].sort()).toEqual(expected.sort());
    // Each writer's own lines stay in its order.
    for (const name of ['ana', 'ben']) expect(lines.filter((l) => l.startsWith(name))).toEqual([...Array(count).keys()].map((k) => `${name}-${k}`));
    expect(final.annotation.version).toBe(2 * count);
    expect(final.history).toHaveLength(2 * count);
  });
});
