/**
 * Hostile review bundles: each is refused with an error naming the problem (and where), and the study is left
 * exactly as it was (a dump of the review tables before and after). Bundles for another model or probe set are
 * refused unless a layer mapping is confirmed. The strict JSON reader agrees with JSON.parse (the reference) on
 * valid JSON and refuses what JSON.parse silently accepts (duplicate keys).
 */
import fs from 'node:fs';
import path from 'node:path';
import fc from 'fast-check';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, toErrorInfo, type ApiContext } from '../../core/api/index.ts';
import type { ImportResult, ReviewPreview, UnitReview } from '../../core/api/review.ts';
import { readJsonStrict, JsonReadError } from '../../core/review/json.ts';
import { renderNote } from '../../core/review/note.ts';
import { MAX_BUNDLE_BYTES } from '../../core/review/bundle.ts';
import { tempDir } from '../support/fixtures.ts';
import { bareStudy, copyStudy, reviewDump } from './helpers.ts';

const ctx: ApiContext = {};
const api = createApi(ctx);
const call = <T>(method: string, body: unknown) => dispatch(api, ctx, method, body) as Promise<T>;

async function edit(study: string, layer: string, unit: number, reviewer: string, changes: Record<string, unknown>) {
  const cur = await call<UnitReview>('review.get', { study, layer, unit });
  return call('review.edit', { study, layer, unit, version: cur.annotation.version, reviewer, changes });
}

describe('hostile bundles', () => {
  let dir: string;
  let study: string;
  let validText: string;
  let valid: Record<string, any>;
  /** Index of hidden unit 3 (three fields, a two-event note history) among the bundle's units. */
  let H: number;

  beforeAll(async () => {
    dir = tempDir('skein-bundle-');
    const template = bareStudy(path.join(dir, 'template.study'), [{ name: 'hidden', units: 8 }, { name: 'head', units: 2 }]);
    study = copyStudy(template, path.join(dir, 'mine.study'));
    await edit(study, 'hidden', 1, 'ana', { addTags: ['mixed'], note: 'mine' });
    const theirs = copyStudy(template, path.join(dir, 'theirs.study'));
    await edit(theirs, 'hidden', 3, 'ben', { addTags: ['follow-up'], status: 'looking', note: 'first' });
    await edit(theirs, 'hidden', 3, 'ben', { note: 'second' });
    await edit(theirs, 'head', 0, 'ben', { status: 'parked' });
    const out = path.join(dir, 'valid.json');
    await call('review.export', { study: theirs, out });
    validText = fs.readFileSync(out, 'utf8');
    valid = JSON.parse(validText);
    H = valid.units.findIndex((u: { layer: string; unit: number }) => u.layer === 'hidden' && u.unit === 3);
  });

  let n = 0;
  function write(content: string | Buffer): string {
    const f = path.join(dir, `hostile-${n++}.json`);
    fs.writeFileSync(f, content);
    return f;
  }
  const variant = (change: (b: Record<string, any>) => void) => {
    const b = structuredClone(valid);
    change(b);
    return write(JSON.stringify(b, null, 1));
  };

  /** Imports `file`, expects a refusal matching `message` (and `where`), and an unchanged study. */
  async function refused(file: string, message: RegExp, where?: RegExp | string) {
    const before = reviewDump(study);
    let info;
    try {
      await call('review.import', { study, file });
    } catch (e) {
      info = toErrorInfo(e);
    }
    expect(info, 'the import should have been refused').toBeDefined();
    expect(info!.code).toBe('review');
    expect(info!.message).toMatch(message);
    expect(info!.message).toMatch(/Nothing was imported\.$/);
    if (where !== undefined) expect(info!.where).toMatch(where);
    expect(reviewDump(study)).toEqual(before);
    return info!;
  }

  it('accepts the untouched bundle in a copy (the corpus below differs from it in one way each)', async () => {
    const copy = copyStudy(study, path.join(dir, 'accepts.study'));
    const r = await call<ImportResult>('review.import', { study: copy, file: write(validText) });
    expect(r.merged.newEvents).toBe(5);
    expect(r.conflicts).toEqual([]);
  });

  it('refuses a file over the size limit before reading it', async () => {
    const f = path.join(dir, 'huge.json');
    fs.writeFileSync(f, '');
    fs.truncateSync(f, MAX_BUNDLE_BYTES + 1);
    await refused(f, /is 50\.0 MB; a review bundle is at most 50 MB/);
  });

  it('refuses a note longer than the limit inside a well-formed bundle', async () => {
    await refused(variant((b) => { b.units[H].events[0].field = 'note'; b.units[H].events[0].old = ''; b.units[H].events[0].new = 'x'.repeat(20_001); }),
      /note has at most 20000 characters/, new RegExp(`^units\\[${H}\\]\\.events\\[0\\]`));
  });

  it('refuses truncated and malformed JSON, naming line and column', async () => {
    const cut = validText.slice(0, Math.floor(validText.length / 2));
    const e = await refused(write(cut), /not valid JSON: the file ends in the middle of the JSON: it is truncated/, /^line \d+, column \d+$/);
    expect(Number(e.where!.split(' ')[1].replace(',', ''))).toBe(cut.split('\n').length);
    await refused(write('{"kind": "skein-review-bundle",, "schema": 1}'), /not valid JSON: unexpected ","/, 'line 1, column 32');
    await refused(write('{"kind": \'skein\'}'), /not valid JSON: unexpected "'": expected a value/, 'line 1, column 10');
    await refused(write('{"a": 1} {"b": 2}'), /after the end of the JSON value/);
    await refused(write('{"a": [1, 2'), /truncated/);
    await refused(write('{"a": "line\nbreak"}'), /raw control character/);
    await refused(write('[' .repeat(100_000)), /nesting is deeper than 16 levels/);
  });

  it('refuses empty files, non-UTF-8 bytes, folders and JSON that is not a bundle', async () => {
    await refused(write(''), /file is empty/);
    await refused(write(Buffer.from([0xff, 0xfe, 0x7b, 0x00, 0x7d, 0x00])), /not UTF-8 text/);
    await refused(dir, /folder, not a review bundle/);
    await refused(path.join(dir, 'missing.json'), /no file here/);
    await refused(write('[1, 2, 3]'), /is a JSON object/);
    await refused(write('{"kind": "something-else", "entries": []}'), /not a Skein review bundle/, 'kind');
    await refused(variant((b) => { b.schema = 2; }), /schema 2, newer than this Skein understands \(1\)/, 'schema');
  });

  it('refuses unknown fields anywhere, including __proto__', async () => {
    await refused(variant((b) => { b.colour = 'teal'; }), /unknown field "colour"/, '(top level)');
    await refused(variant((b) => { b.units[H].events[0].mood = 'happy'; }), /unknown field "mood"/, `units[${H}].events[0]`);
    await refused(variant((b) => { b.model.path = '/home/someone/model.onnx'; }), /unknown field "path"/, 'model');
    await refused(write(validText.replace('"kind":', '"__proto__": {"polluted": true},\n "kind":')), /unknown field "__proto__"/);
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });

  it('refuses wrong types and values that do not fit their field', async () => {
    await refused(variant((b) => { b.units[H].unit = '3'; }), /\.unit: .*expected number/i, `units[${H}].unit`);
    await refused(variant((b) => { b.units[H].unit = 2.5; }), /\.unit: /, `units[${H}].unit`);
    await refused(variant((b) => { b.units[H].events = {}; }), /expected array/i, `units[${H}].events`);
    await refused(variant((b) => { b.units[H].events[0].at = 'yesterday'; }), /ISO 8601/, `units[${H}].events[0].at`);
    await refused(variant((b) => { b.units[H].events[0].id = 'not-a-uuid'; }), /lowercase UUID/, `units[${H}].events[0].id`);
    const noteEvent = valid.units[H].events.findIndex((e: { field: string }) => e.field === 'note');
    await refused(variant((b) => { b.units[H].events[noteEvent].new = 5; }), /value is text/, `units[${H}].events[${noteEvent}].new`);
    await refused(variant((b) => { b.units[H].events[noteEvent].new = true; }), /note must be text, got boolean/);
    await refused(variant((b) => { b.units[H].events[noteEvent].new = 'bell\u0007'; }), /without control characters/);
    const statusEvent = valid.units[H].events.findIndex((e: { field: string }) => e.field === 'status');
    await refused(variant((b) => { b.units[H].events[statusEvent].new = 'agreed'; }), /"agreed" is not a status/);
    await refused(variant((b) => { b.units[H].events[0].field = 'colour'; }), /"colour" is not a review field/);
    await refused(variant((b) => { b.units[H].events[0].author = ''; }), /reviewer name cannot be empty/);
  });

  it('refuses duplicated keys that JSON.parse would silently collapse', async () => {
    const dup = validText.replace('"schema": 1,', '"schema": 1,\n "schema": 1,');
    expect(JSON.parse(dup).schema).toBe(1);
    await refused(write(dup), /the field "schema" appears twice in the same object/, /^line 4, column 2$/);
    const inner = validText.replace(/"unit": (\d+),/, '"unit": $1, "unit": 7,');
    await refused(write(inner), /the field "units\[0\]\.unit" appears twice/);
  });

  it('refuses broken histories: duplicate ids and units, missing or reordered parents, units outside the layer', async () => {
    await refused(variant((b) => { b.units[H].events[1].id = b.units[H].events[0].id; }), /appears twice/, `units[${H}].events[1].id`);
    await refused(variant((b) => { b.units.push(structuredClone(b.units[H])); }), /appears twice/);
    const child = valid.units[H].events.findIndex((e: { parents: string[] }) => e.parents.length > 0);
    expect(child).toBeGreaterThan(0);
    await refused(variant((b) => { b.units[H].events[child].parents = ['00000000-0000-4000-8000-000000000000']; }), /does not come before it/);
    await refused(variant((b) => { b.units[H].events.reverse(); }), /does not come before it/);
    await refused(variant((b) => { b.units[H].unit = 8; }), /has 8 units, so unit 8 does not exist/);
    await refused(variant((b) => { b.units[H].layer = 'elsewhere'; }), /layer list does not name/);
    await refused(variant((b) => { b.layers.push({ name: 'extra', units: 8 }); b.units[H].layer = 'extra'; }), /has not scanned/);
  });

  it('refuses a bundle whose event contradicts the same event already in the study', async () => {
    const copy = copyStudy(study, path.join(dir, 'altered.study'));
    await call('review.import', { study: copy, file: write(validText) });
    const before = reviewDump(copy);
    const altered = variant((b) => { b.units[H].events[0].author = 'mallory'; });
    await expect(call('review.import', { study: copy, file: altered })).rejects.toThrow(/differs from the event with the same id in this study: the bundle was altered/);
    expect(reviewDump(copy)).toEqual(before);
  });

  it('stores <script> in a note as text and renders it inert', async () => {
    const copy = copyStudy(study, path.join(dir, 'script.study'));
    const noteEvent = valid.units[H].events.findLastIndex((e: { field: string }) => e.field === 'note');
    const evil = '<script>alert(1)</script> [x](javascript:alert(2)) <img src=x onerror=alert(3)>';
    await call('review.import', { study: copy, file: variant((b) => { b.units[H].events[noteEvent].new = evil; }) });
    const r = await call<UnitReview>('review.get', { study: copy, layer: 'hidden', unit: 3 });
    expect(r.annotation.note).toBe(evil);
    // No element but the paragraph and the emptied link; the rest is escaped text.
    expect(r.noteHtml).not.toMatch(/<script|<img/i);
    expect(r.noteHtml).not.toMatch(/<[^>]+\son\w+\s*=/i);
    expect(r.noteHtml).not.toMatch(/href="\s*javascript:/i);
    expect(r.noteHtml).toBe('<p>&lt;script&gt;alert(1)&lt;/script&gt; <a href="">x</a> &lt;img src=x onerror=alert(3)&gt;</p>');
    expect(renderNote(evil, { links: false })).not.toMatch(/<a |<script|<img/);
  });
});

describe('bundles for another model or probe set', () => {
  let dir: string;
  let mine: string;
  let other: string;
  let wide: string;
  beforeAll(async () => {
    dir = tempDir('skein-mapping-');
    mine = bareStudy(path.join(dir, 'mine.study'), [{ name: 'hidden', units: 4 }, { name: 'head', units: 2 }], { model: 'model-v2', probes: 'probes-1' });
    const theirs = bareStudy(path.join(dir, 'theirs.study'), [{ name: 'hidden', units: 4 }], { model: 'model-v1', probes: 'probes-1' });
    await edit(theirs, 'hidden', 2, 'ben', { addTags: ['mixed'], note: 'seen on v1' });
    other = path.join(dir, 'other.json');
    await call('review.export', { study: theirs, out: other });
    const wideStudy = bareStudy(path.join(dir, 'wide.study'), [{ name: 'hidden', units: 10 }], { model: 'model-v3', probes: 'probes-1' });
    await edit(wideStudy, 'hidden', 8, 'ben', { status: 'parked' });
    wide = path.join(dir, 'wide.json');
    await call('review.export', { study: wideStudy, out: wide });
  });

  it('refuses without a mapping, and the preview says why and proposes one by layer names', async () => {
    const before = reviewDump(mine);
    await expect(call('review.import', { study: mine, file: other })).rejects.toThrow(/made for another model \(bundle model-v1…, this study model-v2…\).*confirm a mapping of layers/);
    expect(reviewDump(mine)).toEqual(before);
    const p = await call<ReviewPreview>('review.preview', { study: mine, file: other });
    expect(p.check.model.same).toBe(false);
    expect(p.check.probes.same).toBe(true);
    expect(p.refused).toMatch(/another model/);
    expect(p.check.proposedMapping).toEqual({ hidden: 'hidden' });
    expect(reviewDump(mine)).toEqual(before);
  });

  it('imports under a confirmed mapping, idempotently', async () => {
    const copy = copyStudy(mine, path.join(dir, 'mapped.study'));
    const r = await call<ImportResult>('review.import', { study: copy, file: other, mapping: 'by-name' });
    expect(r.fingerprintsMatched).toBe(false);
    expect(r.merged.newEvents).toBe(2);
    const got = await call<UnitReview>('review.get', { study: copy, layer: 'hidden', unit: 2 });
    expect(got.annotation.tags).toEqual(['mixed']);
    expect(got.annotation.note).toBe('seen on v1');
    expect(got.history.every((e) => e.sourceId !== null && e.sourceId !== e.id)).toBe(true);
    const once = reviewDump(copy);
    const again = await call<ImportResult>('review.import', { study: copy, file: other, mapping: { hidden: 'hidden' } });
    expect(again.merged.newEvents).toBe(0);
    expect(reviewDump(copy)).toEqual(once);
  });

  it('refuses mappings that do not fit', async () => {
    const before = reviewDump(mine);
    await expect(call('review.import', { study: mine, file: other, mapping: { hidden: 'nowhere' } })).rejects.toThrow(/mapped to "nowhere", which is not a layer of this study/);
    await expect(call('review.import', { study: mine, file: other, mapping: {} })).rejects.toThrow(/does not say where the bundle's layer "hidden" goes/);
    await expect(call('review.import', { study: mine, file: wide, mapping: 'by-name' })).rejects.toThrow(/annotates unit 8 of "hidden", but "hidden" here has only 4 units/);
    expect(reviewDump(mine)).toEqual(before);
    const p = await call<ReviewPreview>('review.preview', { study: mine, file: wide });
    expect(p.check.proposedMapping).toEqual({ hidden: null });
  });
});

describe('browser mode', () => {
  it('refuses bundle and CSV paths outside the allowed folders, like every other path', async () => {
    const inside = tempDir('skein-roots-');
    const outside = tempDir('skein-elsewhere-');
    const study = bareStudy(path.join(inside, 'a.study'), [{ name: 'hidden', units: 2 }]);
    fs.writeFileSync(path.join(outside, 'b.json'), '{}');
    const local: ApiContext = { allowedRoots: [inside] };
    const confined = createApi(local);
    for (const [method, body, field] of [
      ['review.import', { study, file: path.join(outside, 'b.json') }, 'file'],
      ['review.preview', { study, file: path.join(outside, 'b.json') }, 'file'],
      ['report.write', { study, out: path.join(inside, 'r.html'), csv: path.join(outside, 'r.csv'), filter: {} }, 'csv'],
      ['review.export', { study, out: path.join(outside, 'b2.json') }, 'out'],
    ] as const) {
      const e = await dispatch(confined, local, method, body).then(() => null, toErrorInfo);
      expect(e?.code, method).toBe('request');
      expect(e?.where).toBe(field);
      expect(e?.message).toMatch(/outside the folders Skein may use in browser mode/);
    }
    expect(fs.readdirSync(outside)).toEqual(['b.json']);
  });
});

describe('the strict JSON reader', () => {
  // JSON.parse is the reference for valid JSON (ECMA-262, JSON.parse; RFC 8259 grammar).
  it('reads every valid JSON text as JSON.parse does', () => {
    fc.assert(fc.property(fc.json({ depthSize: 'small' }), (text) => {
      expect(readJsonStrict(text, { maxDepth: 64 })).toEqual(JSON.parse(text));
    }), { numRuns: 500 });
    for (const t of ['-0', '1e400'.replace('400', '30'), '"\\ud83d\\ude00"', '"\\u00e9\\/"', ' \t\n[ ]\r\n', '{"":""}', '0.5e-3']) {
      expect(readJsonStrict(t)).toEqual(JSON.parse(t));
    }
  });

  it('refuses what RFC 8259 does not allow', () => {
    for (const t of ['01', '1.', '.5', '+1', 'NaN', '[1,]', '{"a":1,}', "'a'", 'tru', '"\\x41"', '{a:1}', '1e999']) {
      expect(() => JSON.parse(t === '1e999' ? '[]x' : t), t).toThrow(SyntaxError);
      expect(() => readJsonStrict(t), t).toThrow(JsonReadError);
    }
  });
});
