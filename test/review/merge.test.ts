/**
 * The merge algebra, as properties over random histories (fast-check), on real study files through the real API and
 * real bundle files. Two reviewers start from a shared history, edit independently, then exchange bundles.
 * The oracle is the rule the issue states, computed from the edits alone (not from the event DAG): a field conflicts
 * exactly when both sides changed it since their common history and their results differ; a field one side changed
 * takes that side's value; an untouched field keeps the shared value. Idempotence (A∪B∪B = A∪B) and order
 * independence (A∪B = B∪A, (A∪B)∪C = (A∪C)∪B) are set-union laws; the test checks the study files obey them.
 */
import fs from 'node:fs';
import path from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, type Api, type ApiContext } from '../../core/api/index.ts';
import type { Annotation, ImportResult } from '../../core/api/review.ts';
import { STATUSES } from '../../core/review/vocabulary.ts';
import { tempDir } from '../support/fixtures.ts';
import { bareStudy, copyStudy, reviewDump } from './helpers.ts';

const UNITS = 3;
const TAGS = ['x', 'y', 'z'];
const NOTES = ['', 'alpha', 'beta', 'gamma'];

type Op =
  | { unit: number; kind: 'note'; value: string }
  | { unit: number; kind: 'status'; value: string }
  | { unit: number; kind: 'tag'; tag: string; present: boolean };

const opArb: fc.Arbitrary<Op> = fc.oneof(
  fc.record({ unit: fc.integer({ min: 0, max: UNITS - 1 }), kind: fc.constant('note' as const), value: fc.constantFrom(...NOTES) }),
  fc.record({ unit: fc.integer({ min: 0, max: UNITS - 1 }), kind: fc.constant('status' as const), value: fc.constantFrom(...STATUSES) }),
  fc.record({ unit: fc.integer({ min: 0, max: UNITS - 1 }), kind: fc.constant('tag' as const), tag: fc.constantFrom(...TAGS), present: fc.boolean() }),
);
const opsArb = fc.array(opArb, { maxLength: 8 });

const fieldOf = (op: Op) => `${op.unit}/${op.kind === 'tag' ? `tag:${op.tag}` : op.kind}`;

/** What a replica shows, field by field, in the oracle's own bookkeeping. */
type Values = Map<string, string | boolean>;

function defaultOf(field: string): string | boolean {
  return field.endsWith('/note') ? '' : field.endsWith('/status') ? 'unreviewed' : false;
}

/** Applies ops to the oracle's values; returns the fields whose value an op actually changed (no-op edits write nothing). */
function simulate(values: Values, ops: Op[]): Set<string> {
  const changed = new Set<string>();
  for (const op of ops) {
    const f = fieldOf(op);
    const next = op.kind === 'tag' ? op.present : op.value;
    if ((values.get(f) ?? defaultOf(f)) !== next) {
      values.set(f, next);
      changed.add(f);
    }
  }
  return changed;
}

function allFields(): string[] {
  const out: string[] = [];
  for (let u = 0; u < UNITS; u++) out.push(`${u}/note`, `${u}/status`, ...TAGS.map((t) => `${u}/tag:${t}`));
  return out;
}

function shown(a: Annotation, field: string): string | boolean {
  const f = field.split('/')[1];
  return f === 'note' ? a.note : f === 'status' ? a.status : a.tags.includes(f.slice(4));
}

describe('merging review bundles', () => {
  let dir: string;
  let template: string;
  let api: Api;
  const ctx: ApiContext = {};
  let n = 0;
  const call = <T>(method: string, body: unknown) => dispatch(api, ctx, method, body) as Promise<T>;

  beforeAll(() => {
    dir = tempDir('skein-merge-');
    template = bareStudy(path.join(dir, 'template.study'), [{ name: 'hidden', units: UNITS }]);
    api = createApi(ctx);
  });
  afterAll(() => fs.rmSync(dir, { recursive: true, force: true }));

  const fresh = () => copyStudy(template, path.join(dir, `s${n++}.study`));

  async function apply(study: string, reviewer: string, ops: Op[]): Promise<void> {
    for (const op of ops) {
      const cur = await call<{ annotation: Annotation }>('review.get', { study, layer: 'hidden', unit: op.unit });
      const changes = op.kind === 'tag' ? (op.present ? { addTags: [op.tag] } : { removeTags: [op.tag] }) : { [op.kind]: op.value };
      await call('review.edit', { study, layer: 'hidden', unit: op.unit, version: cur.annotation.version, reviewer, changes });
    }
  }

  async function bundleOf(study: string): Promise<string> {
    const out = path.join(dir, `b${n++}.json`);
    await call('review.export', { study, out, reviewer: 'exporter' });
    return out;
  }

  const importInto = (study: string, file: string) => call<ImportResult>('review.import', { study, file });

  async function state(study: string): Promise<Map<number, Annotation>> {
    const out = new Map<number, Annotation>();
    for (let u = 0; u < UNITS; u++) out.set(u, (await call<{ annotation: Annotation }>('review.get', { study, layer: 'hidden', unit: u })).annotation);
    return out;
  }

  /** Two replicas sharing `base`, then edited apart. Returns the studies and the oracle's bookkeeping. */
  async function fork(base: Op[], opsA: Op[], opsB: Op[], opsC: Op[] = []) {
    const a = fresh();
    const b = fresh();
    await apply(a, 'cy', base);
    await importInto(b, await bundleOf(a));
    // A third reviewer forking from the same shared history.
    const c = copyStudy(b, path.join(dir, `c${n++}.study`));
    await apply(c, 'cleo', opsC);
    const baseValues: Values = new Map();
    simulate(baseValues, base);
    const va = new Map(baseValues);
    const vb = new Map(baseValues);
    const changedA = simulate(va, opsA);
    const changedB = simulate(vb, opsB);
    await apply(a, 'ana', opsA);
    await apply(b, 'ben', opsB);
    return { a, b, c, baseValues, va, vb, changedA, changedB };
  }

  /** The rule of the issue: the value each field shows after `mine` imports `theirs`, and whether it conflicts. */
  function expected(f: string, mine: { v: Values; changed: Set<string> }, theirs: { v: Values; changed: Set<string> }, base: Values) {
    const m = mine.v.get(f) ?? defaultOf(f);
    const t = theirs.v.get(f) ?? defaultOf(f);
    if (mine.changed.has(f) && theirs.changed.has(f)) return { value: m, conflict: m !== t };
    if (theirs.changed.has(f)) return { value: t, conflict: false };
    if (mine.changed.has(f)) return { value: m, conflict: false };
    return { value: base.get(f) ?? defaultOf(f), conflict: false };
  }

  it('merges what one side changed, and lists a conflict exactly when both changed a field to different results', async () => {
    await fc.assert(fc.asyncProperty(opsArb, opsArb, opsArb, async (base, opsA, opsB) => {
      const f = await fork(base, opsA, opsB);
      const bundleB = await bundleOf(f.b);
      const result = await importInto(f.a, bundleB);
      const after = await state(f.a);
      const reported = new Set(result.conflicts.map((c) => `${c.unit}/${c.field}`));
      for (const field of allFields()) {
        const want = expected(field, { v: f.va, changed: f.changedA }, { v: f.vb, changed: f.changedB }, f.baseValues);
        const unit = Number(field.split('/')[0]);
        const a = after.get(unit)!;
        expect(shown(a, field), field).toBe(want.value);
        expect(a.conflicts.includes(field.split('/')[1] as Annotation['conflicts'][number]), `${field} stored as conflict`).toBe(want.conflict);
        expect(reported.has(field), `${field} reported`).toBe(want.conflict);
      }
    }), { numRuns: 40 });
  });

  it('is idempotent: importing the same bundle again changes nothing in the study file (A∪B∪B = A∪B)', async () => {
    await fc.assert(fc.asyncProperty(opsArb, opsArb, opsArb, async (base, opsA, opsB) => {
      const f = await fork(base, opsA, opsB);
      const bundleB = await bundleOf(f.b);
      const first = await importInto(f.a, bundleB);
      const once = reviewDump(f.a);
      const second = await importInto(f.a, bundleB);
      expect(reviewDump(f.a)).toEqual(once);
      expect(second.merged.newEvents).toBe(0);
      expect(second.changes).toEqual([]);
      expect(second.conflicts).toEqual(first.conflicts);
      // Importing one's own bundle back is a no-op as well.
      await importInto(f.a, await bundleOf(f.a));
      expect(reviewDump(f.a)).toEqual(once);
    }), { numRuns: 25 });
  });

  it('is order-independent: A∪B and B∪A hold the same history, the same merged values and the same conflicts', async () => {
    await fc.assert(fc.asyncProperty(opsArb, opsArb, opsArb, async (base, opsA, opsB) => {
      const f = await fork(base, opsA, opsB);
      const bundleA = await bundleOf(f.a);
      const bundleB = await bundleOf(f.b);
      await importInto(f.a, bundleB);
      await importInto(f.b, bundleA);
      const ids = (s: string) => reviewDump(s).events.map((e) => {
        const { seq: _seq, origin: _origin, ...rest } = e as Record<string, unknown>;
        return JSON.stringify(rest);
      }).sort();
      expect(ids(f.a)).toEqual(ids(f.b));
      const sa = await state(f.a);
      const sb = await state(f.b);
      for (let u = 0; u < UNITS; u++) {
        const x = sa.get(u)!;
        const y = sb.get(u)!;
        expect(x.conflicts).toEqual(y.conflicts);
        for (const field of allFields().filter((g) => g.startsWith(`${u}/`))) {
          if (!x.conflicts.includes(field.split('/')[1] as never)) expect(shown(x, field), field).toBe(shown(y, field));
        }
      }
    }), { numRuns: 25 });
  });

  it('is order-independent over three reviewers: (A∪B)∪C and (A∪C)∪B agree outside conflicts', async () => {
    await fc.assert(fc.asyncProperty(opsArb, opsArb, opsArb, opsArb, async (base, opsA, opsB, opsC) => {
      const f = await fork(base, opsA, opsB, opsC);
      const a2 = copyStudy(f.a, path.join(dir, `a2-${n++}.study`));
      const bundleB = await bundleOf(f.b);
      const bundleC = await bundleOf(f.c);
      await importInto(f.a, bundleB);
      await importInto(f.a, bundleC);
      await importInto(a2, bundleC);
      await importInto(a2, bundleB);
      const events = (s: string) => reviewDump(s).events.map((e) => (e as { id: string }).id).sort();
      expect(events(f.a)).toEqual(events(a2));
      const s1 = await state(f.a);
      const s2 = await state(a2);
      for (let u = 0; u < UNITS; u++) {
        expect(s1.get(u)!.conflicts).toEqual(s2.get(u)!.conflicts);
        for (const field of allFields().filter((g) => g.startsWith(`${u}/`))) {
          if (!s1.get(u)!.conflicts.includes(field.split('/')[1] as never)) expect(shown(s1.get(u)!, field), field).toBe(shown(s2.get(u)!, field));
        }
      }
    }), { numRuns: 20 });
  });

  it('converges once conflicts are resolved and the resolution travels back', async () => {
    await fc.assert(fc.asyncProperty(opsArb, opsArb, opsArb, fc.constantFrom('mine', 'theirs') as fc.Arbitrary<'mine' | 'theirs'>, async (base, opsA, opsB, keep) => {
      const f = await fork(base, opsA, opsB);
      const bundleB = await bundleOf(f.b);
      const preview = await call<{ conflicts: ImportResult['conflicts'] }>('review.preview', { study: f.a, file: bundleB });
      const resolutions = preview.conflicts.map((c) => ({ layer: c.layer, unit: c.unit, field: c.field, keep }));
      const r = await call<ImportResult>('review.import', { study: f.a, file: bundleB, resolutions, reviewer: 'ana' });
      expect(r.conflicts).toEqual([]);
      for (const c of preview.conflicts) {
        const a = (await state(f.a)).get(c.unit)!;
        expect(shown(a, `${c.unit}/${c.field}`)).toBe(keep === 'mine' ? c.mine.value : c.theirs.value);
      }
      await importInto(f.b, await bundleOf(f.a));
      const sa = await state(f.a);
      const sb = await state(f.b);
      for (let u = 0; u < UNITS; u++) {
        const { version: _va, ...x } = sa.get(u)!;
        const { version: _vb, ...y } = sb.get(u)!;
        expect(y).toEqual(x);
        expect(x.conflicts).toEqual([]);
      }
    }), { numRuns: 20 });
  });
});
