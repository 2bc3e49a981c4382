/**
 * Editing one unit: tags, note, status, history, undo, validation, preferences, and annotations staying attached to
 * their units across rescans (keyed by model + probe-set fingerprints, layer and unit). Real scans, real study files.
 */
import fs from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, runScan, toErrorInfo, type ApiContext } from '../../core/api/index.ts';
import type { Annotation, ReviewList, UndoResult, UnitReview } from '../../core/api/review.ts';
import { tempDir, writePlanted } from '../support/fixtures.ts';
import { bareStudy, scannedStudy, type ScannedStudy } from './helpers.ts';

const ctx: ApiContext = {};
const api = createApi(ctx);
const call = <T>(method: string, body: unknown) => dispatch(api, ctx, method, body) as Promise<T>;
const get = (study: string, unit: number, layer = 'hidden') => call<UnitReview>('review.get', { study, layer, unit });
async function edit(study: string, unit: number, reviewer: string, changes: Record<string, unknown>, layer = 'hidden') {
  const cur = await get(study, unit, layer);
  return call<Annotation>('review.edit', { study, layer, unit, version: cur.annotation.version, reviewer, changes });
}
async function failure(p: Promise<unknown>) {
  try {
    await p;
  } catch (e) {
    return toErrorInfo(e);
  }
  throw new Error('expected a failure');
}

describe('editing a unit', () => {
  let dir: string;
  beforeAll(() => { dir = tempDir('skein-edit-'); });
  const study = (name: string) => bareStudy(path.join(dir, `${name}.study`), [{ name: 'hidden', units: 5 }]);

  it('records tags, note and status with who and when, and the history of every change', async () => {
    const s = study('basic');
    const empty = await get(s, 1);
    expect(empty.annotation).toMatchObject({ tags: [], note: '', status: 'unreviewed', version: 0, reviewer: null });
    const a = await edit(s, 1, 'ana', { tags: ['mixed', 'follow-up'], note: 'two **hues**', status: 'looking' });
    expect(a).toMatchObject({ tags: ['follow-up', 'mixed'], note: 'two **hues**', status: 'looking', version: 1, reviewer: 'ana', conflicts: [] });
    const b = await edit(s, 1, 'ben', { removeTags: ['follow-up'], addTags: ['label-noise'], status: 'doubtful' });
    expect(b).toMatchObject({ tags: ['label-noise', 'mixed'], status: 'doubtful', version: 2, reviewer: 'ben', createdAt: a.createdAt });
    const r = await get(s, 1);
    expect(r.noteHtml).toBe('<p>two <strong>hues</strong></p>');
    expect(r.history.map((e) => [e.author, e.field, e.old, e.new])).toEqual([
      ['ben', 'status', 'looking', 'doubtful'],
      ['ben', 'tag:label-noise', false, true],
      ['ben', 'tag:follow-up', true, false],
      ['ana', 'status', 'unreviewed', 'looking'],
      ['ana', 'note', '', 'two **hues**'],
      ['ana', 'tag:mixed', false, true],
      ['ana', 'tag:follow-up', false, true],
    ]);
    // A change names the field's previous event as its parent: that is what merging compares.
    const statusEvents = r.history.filter((e) => e.field === 'status');
    expect(statusEvents[0].parents).toEqual([statusEvents[1].id]);
    // An edit that changes nothing writes nothing and keeps the version.
    expect((await edit(s, 1, 'ben', { status: 'doubtful', addTags: ['mixed'] })).version).toBe(2);
    const list = await call<ReviewList>('review.list', { study: s });
    expect(list.count).toBe(1);
    expect(list.tags[0]).toEqual(['label-noise', 'mixed']);
    expect(list.statusCounts.doubtful).toBe(1);
    expect((await call<ReviewList>('review.list', { study: s, filter: { tags: ['follow-up'] } })).count).toBe(0);
  });

  it('keeps history append-only at the database level', async () => {
    const s = study('append-only');
    await edit(s, 0, 'ana', { note: 'kept' });
    const db = new Database(s);
    try {
      expect(() => db.prepare(`UPDATE annotation_event SET new_value = '"gone"'`).run()).toThrow(/append-only/);
      expect(() => db.prepare(`DELETE FROM annotation_event`).run()).toThrow(/append-only/);
    } finally {
      db.close();
    }
  });

  it('undoes this reviewer\'s last edits one by one, as new history', async () => {
    const s = study('undo');
    await edit(s, 2, 'ana', { note: 'first' });
    await edit(s, 3, 'ana', { addTags: ['x'], status: 'looking' });
    await edit(s, 4, 'ben', { note: 'ben was here' });
    const u1 = await call<UndoResult>('review.undo', { study: s, reviewer: 'ana' });
    expect(u1.undone).toMatchObject({ layer: 'hidden', unit: 3 });
    expect(new Set(u1.undone!.fields)).toEqual(new Set(['tag:x', 'status']));
    expect(u1.annotation).toMatchObject({ tags: [], status: 'unreviewed' });
    const u2 = await call<UndoResult>('review.undo', { study: s, reviewer: 'ana' });
    expect(u2.undone).toMatchObject({ unit: 2, fields: ['note'] });
    expect((await get(s, 2)).annotation.note).toBe('');
    expect((await call<UndoResult>('review.undo', { study: s, reviewer: 'ana' })).undone).toBeNull();
    // Ben's edit is his: Ana's undo never touched it.
    expect((await get(s, 4)).annotation.note).toBe('ben was here');
    const h = (await get(s, 3)).history;
    expect(h).toHaveLength(4);
    expect(h.slice(0, 2).every((e) => e.undoes === h[2].edit)).toBe(true);
  });

  it('refuses an undo that would overwrite someone else\'s later change', async () => {
    const s = study('undo-conflict');
    await edit(s, 0, 'ana', { note: 'ana wrote' });
    await edit(s, 0, 'ben', { note: 'ben rewrote' });
    const before = await get(s, 0);
    const e = await failure(call('review.undo', { study: s, reviewer: 'ana' }));
    expect(e.code).toBe('conflict');
    expect(e.message).toMatch(/note of hidden unit 0 changed after your edit \(by ben\); undoing would overwrite that change/);
    expect(await get(s, 0)).toEqual(before);
  });

  it('validates every edit at the boundary and names the field', async () => {
    const s = study('validate');
    const base = { study: s, layer: 'hidden', unit: 0, version: 0, reviewer: 'ana' };
    const cases: [Record<string, unknown>, RegExp, string][] = [
      [{ ...base, changes: { status: 'agreed' } }, /a status is one of unreviewed, looking, confirmed, doubtful, parked/, 'changes.status'],
      [{ ...base, changes: { addTags: ['two\nlines'] } }, /one line of text/, 'changes.addTags.0'],
      [{ ...base, changes: { addTags: [' padded'] } }, /no leading or trailing spaces/, 'changes.addTags.0'],
      [{ ...base, changes: { note: 'x'.repeat(20_001) } }, /at most 20000 characters/, 'changes.note'],
      [{ ...base, changes: { colour: 'red' } }, /Unrecognized key/i, 'changes'],
      [{ ...base, reviewer: '' }, /reviewer name cannot be empty/, 'reviewer'],
      [{ ...base, unit: 5, changes: { note: 'x' } }, /units 0–4; 5 is out of range/, 'unit'],
      [{ ...base, layer: 'nope', changes: { note: 'x' } }, /No layer "nope"/, 'layer nope'],
      [{ ...base, changes: { tags: Array.from({ length: 33 }, (_, i) => `t${i}`) } }, /Too big|at most 32/i, 'changes.tags'],
    ];
    for (const [body, message, where] of cases) {
      const e = await failure(call('review.edit', body));
      expect(e.code, JSON.stringify(body).slice(0, 80)).toBe('request');
      expect(e.message).toMatch(message);
      expect(e.where).toBe(where);
    }
    await edit(s, 0, 'ana', { addTags: Array.from({ length: 32 }, (_, i) => `t${i}`) });
    const e = await failure(edit(s, 0, 'ana', { addTags: ['one-more'] }));
    expect(e.message).toMatch(/at most 32 tags; this edit would give it 33/);
    const stale = await failure(call('review.edit', { ...base, version: 0, changes: { note: 'late' } }));
    expect(stale.code).toBe('conflict');
  });
});

describe('resolving stored conflicts', () => {
  it('keeps a conflict on the unit until someone decides it, with a value of their own if they like', async () => {
    const dir = tempDir('skein-resolve-');
    const a = bareStudy(path.join(dir, 'a.study'), [{ name: 'hidden', units: 2 }]);
    const b = bareStudy(path.join(dir, 'b.study'), [{ name: 'hidden', units: 2 }]);
    await edit(a, 0, 'ana', { note: 'ana: two hues' });
    await edit(b, 0, 'ben', { note: 'ben: one hue', status: 'doubtful' });
    const bundle = path.join(dir, 'b.json');
    await call('review.export', { study: b, out: bundle });
    await call('review.import', { study: a, file: bundle });
    const open = await get(a, 0);
    expect(open.annotation).toMatchObject({ note: 'ana: two hues', status: 'doubtful', conflicts: ['note'] });
    expect(open.conflicts).toEqual([{
      layer: 'hidden', unit: 0, field: 'note', base: '',
      mine: { value: 'ana: two hues', author: 'ana', at: expect.any(String) },
      theirs: { value: 'ben: one hue', author: 'ben', at: expect.any(String) },
    }]);
    const nothing = await failure(call('review.resolve', { study: a, reviewer: 'ana', resolutions: [{ layer: 'hidden', unit: 0, field: 'status', keep: 'mine' }] }));
    expect(nothing.message).toMatch(/no unresolved conflict on the status of hidden unit 0/);
    const bad = await failure(call('review.resolve', { study: a, reviewer: 'ana', resolutions: [{ layer: 'hidden', unit: 0, field: 'note', keep: { value: true } }] }));
    expect(bad.message).toMatch(/not valid: the note must be text, got boolean/);
    const r = await call<{ annotations: Annotation[] }>('review.resolve', { study: a, reviewer: 'ana', resolutions: [{ layer: 'hidden', unit: 0, field: 'note', keep: { value: 'one or two hues: look at 20 examples' } }] });
    expect(r.annotations[0]).toMatchObject({ note: 'one or two hues: look at 20 examples', conflicts: [], reviewer: 'ana' });
    const resolution = (await get(a, 0)).history[0];
    expect(resolution.parents).toHaveLength(2);
  });
});

describe('preferences', () => {
  it('stores the reviewer name atomically in the data folder, keeping other keys, and survives a broken file', async () => {
    const home = tempDir('skein-home-');
    const local: ApiContext = { dataDir: home };
    const p = createApi(local);
    expect(await p['prefs.get']({})).toEqual({ reviewer: null, file: path.join(home, 'preferences.json'), problem: null });
    fs.writeFileSync(path.join(home, 'preferences.json'), JSON.stringify({ theme: 'dark' }));
    expect((await p['prefs.set']({ reviewer: 'Ana Lima' })).reviewer).toBe('Ana Lima');
    expect(JSON.parse(fs.readFileSync(path.join(home, 'preferences.json'), 'utf8'))).toEqual({ theme: 'dark', reviewer: 'Ana Lima' });
    expect(fs.readdirSync(home)).toEqual(['preferences.json']);
    fs.writeFileSync(path.join(home, 'preferences.json'), '{"reviewer": "Ana');
    const broken = await p['prefs.get']({});
    expect(broken.reviewer).toBeNull();
    expect(broken.problem).toMatch(/unusable: it is not valid JSON/);
    await p['prefs.set']({ reviewer: 'Ana' });
    expect((await p['prefs.get']({})).reviewer).toBe('Ana');
    expect(fs.readdirSync(home).some((f) => f.startsWith('preferences.json.broken-'))).toBe(true);
  });
});

describe('annotations across rescans', () => {
  let s: ScannedStudy;
  beforeAll(async () => { s = await scannedStudy(); });

  it('stay attached to the same units when the same model and probe set are scanned again', async () => {
    await edit(s.study, 3, 'ana', { addTags: ['mixed'], note: 'red, circle, top' }, 'planted');
    const r = await runScan({ model: s.model, probes: s.probes, study: s.study, batch: 200, layers: ['planted'] });
    expect(r.chunksReused).toBeGreaterThan(0);
    expect((await get(s.study, 3, 'planted')).annotation).toMatchObject({ tags: ['mixed'], note: 'red, circle, top' });
  });

  it('are kept, not shown, for another probe set, and come back with the original one', async () => {
    const other = writePlanted(tempDir('skein-other-'), 3000, 99);
    const notes: string[] = [];
    await runScan({ model: s.model, probes: other.probes, study: s.study, batch: 200, layers: ['planted'] }, { onNote: (m) => notes.push(m) });
    expect(notes.join(' ')).toMatch(/review annotations are kept/);
    const list = await call<ReviewList>('review.list', { study: s.study });
    expect(list.count).toBe(0);
    expect(list.elsewhere).toEqual([expect.objectContaining({ units: 1 })]);
    expect((await get(s.study, 3, 'planted')).annotation.version).toBe(0);
    await edit(s.study, 3, 'ben', { note: 'on the other probe set' }, 'planted');
    await runScan({ model: s.model, probes: s.probes, study: s.study, batch: 200, layers: ['planted'] });
    expect((await get(s.study, 3, 'planted')).annotation).toMatchObject({ tags: ['mixed'], note: 'red, circle, top', reviewer: 'ana' });
    expect((await call<ReviewList>('review.list', { study: s.study })).elsewhere).toEqual([expect.objectContaining({ units: 1 })]);
  });
});
