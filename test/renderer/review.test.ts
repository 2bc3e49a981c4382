/**
 * The review screens' plain logic: 'review.list' columns → rows, the review queue over the roster's rows, the merge
 * mark and note drafts kept in the page's storage. Check values are worked out by hand from the queue's stated rules
 * (our own definitions, no outside source).
 */
import { describe, expect, it } from 'vitest';
import { rowsOfList, queueRows, inQueue, reviewKey, readMergeMark, readDraft, writeDraft, fieldName, type ReviewRow } from '../../app/renderer/src/lib/review.svelte.ts';
import type { UnitTable } from '../../app/renderer/src/lib/table.ts';
import type { Response } from '../../app/renderer/src/lib/api.ts';

function memoryStorage() {
  const m = new Map<string, string>();
  return { getItem: (k: string) => m.get(k) ?? null, setItem: (k: string, v: string) => { m.set(k, v); }, removeItem: (k: string) => { m.delete(k); }, m };
}

// Two layers, three units each: rows 0–2 are layer a, rows 3–5 layer b.
const table = { count: 6, layers: [{ name: 'a', units: 3 }, { name: 'b', units: 3 }], layer: Int32Array.from([0, 0, 0, 1, 1, 1]), unit: Int32Array.from([0, 1, 2, 0, 1, 2]) } as unknown as UnitTable;

const list = {
  fingerprints: { model: 'm', probes: 'p' }, count: 3, layers: ['a', 'b'], layer: [0, 0, 1], unit: [1, 2, 0],
  status: ['looking', 'doubtful', 'unreviewed'], tags: [['follow-up'], [], ['mixed', 'surprising']], note: ['n1', '', ''], noteLength: [2, 0, 0],
  reviewer: ['Rosa', 'Tomas', 'Rosa'], updatedAt: ['2025-03-01T10:00:00.000Z', '2025-03-02T10:00:00.000Z', '2025-03-03T10:00:00.000Z'],
  version: [3, 1, 2], conflicts: [[], [], ['note']], tagCounts: [], statusCounts: {}, elsewhere: [],
} as unknown as Response<'review.list'>;

describe('review rows and queue', () => {
  const rows = rowsOfList(list);
  const all = Int32Array.from([0, 1, 2, 3, 4, 5]);

  it('keys each listed unit by layer and unit', () => {
    expect([...rows.keys()]).toEqual([reviewKey('a', 1), reviewKey('a', 2), reviewKey('b', 0)]);
    expect(rows.get(reviewKey('b', 0))).toMatchObject({ tags: ['mixed', 'surprising'], conflicts: ['note'], version: 2 });
  });

  it('"any" keeps every row, in the order given', () => {
    const order = Int32Array.from([5, 0, 3]);
    expect([...queueRows(table, order, 'all', rows, 'Rosa', null)]).toEqual([5, 0, 3]);
  });

  it('"untagged" keeps units nobody annotated and annotated units without tags', () => {
    // a:1 and b:0 carry tags; a:0, a:2 (annotated, no tag), b:1, b:2 stay.
    expect([...queueRows(table, all, 'untagged', rows, 'Rosa', null)]).toEqual([0, 2, 4, 5]);
  });

  it('"disputed" keeps doubtful units and units with an open conflict', () => {
    expect([...queueRows(table, all, 'disputed', rows, 'Rosa', null)]).toEqual([2, 3]);
  });

  it('"mine" keeps the units whose newest change is the reviewer\'s, and none without a name', () => {
    expect([...queueRows(table, all, 'mine', rows, 'Rosa', null)]).toEqual([1, 3]);
    expect([...queueRows(table, all, 'mine', rows, null, null)]).toEqual([]);
  });

  it('"since merge" keeps what the merge changed and what was edited at or after it; nothing without a merge', () => {
    const mark = { at: '2025-03-02T10:00:00.000Z', units: [reviewKey('a', 0)] };
    // a:0 by the merge; a:2 (2 Mar, equal) and b:0 (3 Mar) edited since; a:1 (1 Mar) before.
    expect([...queueRows(table, all, 'merged', rows, 'Rosa', mark)]).toEqual([0, 2, 3]);
    expect(inQueue('merged', rows.get(reviewKey('b', 0)), reviewKey('b', 0), 'Rosa', null, new Set())).toBe(false);
  });

  it('a row without an annotation is never mine or disputed', () => {
    const none: ReviewRow | undefined = undefined;
    expect(inQueue('mine', none, 'x', 'Rosa', null, new Set())).toBe(false);
    expect(inQueue('disputed', none, 'x', 'Rosa', null, new Set())).toBe(false);
    expect(inQueue('untagged', none, 'x', 'Rosa', null, new Set())).toBe(true);
  });
});

describe('what the page keeps in its storage', () => {
  it('reads back a merge mark, and ignores a broken one', () => {
    const s = memoryStorage();
    s.setItem('skein.merge./s.study', JSON.stringify({ at: '2025-03-02T10:00:00.000Z', units: ['a\u00001'] }));
    expect(readMergeMark(s, '/s.study')).toEqual({ at: '2025-03-02T10:00:00.000Z', units: ['a\u00001'] });
    s.setItem('skein.merge./t.study', '{not json');
    expect(readMergeMark(s, '/t.study')).toBeNull();
    expect(readMergeMark(s, '/u.study')).toBeNull();
  });

  it('keeps a note draft per study and unit until it is cleared', () => {
    const s = memoryStorage();
    writeDraft(s, '/s.study', reviewKey('a', 1), 'half a thought');
    expect(readDraft(s, '/s.study', reviewKey('a', 1))).toBe('half a thought');
    expect(readDraft(s, '/other.study', reviewKey('a', 1))).toBeNull();
    expect(readDraft(s, '/s.study', reviewKey('a', 2))).toBeNull();
    writeDraft(s, '/s.study', reviewKey('a', 1), null);
    expect(readDraft(s, '/s.study', reviewKey('a', 1))).toBeNull();
  });

  it('names fields as a person reads them', () => {
    expect(fieldName('tag:follow-up')).toBe('tag follow-up');
    expect(fieldName('note')).toBe('note');
  });
});
