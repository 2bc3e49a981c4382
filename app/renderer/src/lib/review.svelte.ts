/**
 * Team review as the screens share it for one study: who is reviewing (the preferences' name), the vocabulary, each
 * annotated unit's review state (from 'review.list'), the review queue, and the edit / undo calls. An edit that another
 * writer beat returns the unit as it is now and leaves the caller's text with the caller: nothing typed is dropped.
 */
import { call, asErrorInfo, type ErrorInfo, type Response } from './api.ts';
import type { Annotation, Status } from '../../../../core/api/review.ts';
import type { UnitTable } from './table.ts';

export type { Annotation, Status };

/** The review queue: which units the roster keeps, on top of its own filter. */
export type Queue = 'all' | 'untagged' | 'disputed' | 'mine' | 'merged';

export const QUEUES: { queue: Queue; name: string; title: string }[] = [
  { queue: 'all', name: 'Any', title: 'Every unit, reviewed or not' },
  { queue: 'untagged', name: 'Untagged', title: 'Units nobody has tagged yet' },
  { queue: 'disputed', name: 'Disputed', title: 'Units marked doubtful, or with a conflict from a merge still to decide' },
  { queue: 'mine', name: 'Mine', title: 'Units whose newest review change is yours' },
  { queue: 'merged', name: 'Since merge', title: 'Units the last merge on this computer changed, and units edited after it' },
];

/** One unit's row in the review columns; `note` is the first 200 characters (the whole note: 'review.get'). */
export interface ReviewRow {
  tags: string[];
  status: Status;
  note: string;
  noteLength: number;
  reviewer: string | null;
  updatedAt: string | null;
  version: number;
  conflicts: string[];
}

export type EditChanges = { tags?: string[]; addTags?: string[]; removeTags?: string[]; note?: string; status?: Status };

export type EditOutcome =
  | { ok: true; annotation: Annotation }
  /** `current`: set when another writer changed the unit first (code 'conflict'); the edit was not applied. */
  | { ok: false; error: ErrorInfo; current: Annotation | null };

/** What the last merge on this computer touched, kept per study in the page's storage (the "since merge" queue). */
export interface MergeMark { at: string; units: string[] }

export const reviewKey = (layer: string, unit: number): string => `${layer}\u0000${unit}`;

export function rowOf(a: Annotation): ReviewRow {
  return { tags: a.tags, status: a.status, note: a.note.slice(0, 200), noteLength: a.note.length, reviewer: a.reviewer, updatedAt: a.updatedAt, version: a.version, conflicts: a.conflicts };
}

/** Turns the column arrays of 'review.list' into one row per unit key. */
export function rowsOfList(list: Response<'review.list'>): Map<string, ReviewRow> {
  const m = new Map<string, ReviewRow>();
  for (let i = 0; i < list.count; i++) {
    m.set(reviewKey(list.layers[list.layer[i]], list.unit[i]), {
      tags: list.tags[i], status: list.status[i], note: list.note[i], noteLength: list.noteLength[i], reviewer: list.reviewer[i],
      updatedAt: list.updatedAt[i], version: list.version[i], conflicts: list.conflicts[i],
    });
  }
  return m;
}

/** Does the unit belong in the queue? `row` is undefined for a unit nobody annotated. */
export function inQueue(queue: Queue, row: ReviewRow | undefined, key: string, me: string | null, mark: MergeMark | null, merged: ReadonlySet<string>): boolean {
  switch (queue) {
    case 'all': return true;
    case 'untagged': return !row || row.tags.length === 0;
    case 'disputed': return !!row && (row.status === 'doubtful' || row.conflicts.length > 0);
    case 'mine': return !!row && me !== null && row.reviewer === me;
    case 'merged': return !!mark && (merged.has(key) || (!!row && row.updatedAt !== null && row.updatedAt >= mark.at));
  }
}

/** Roster rows (indices into the unit table) that are in the queue, in the given order. */
export function queueRows(t: UnitTable, rows: Int32Array, queue: Queue, byUnit: ReadonlyMap<string, ReviewRow>, me: string | null, mark: MergeMark | null): Int32Array {
  if (queue === 'all') return rows;
  const merged = new Set(mark?.units ?? []);
  const out = new Int32Array(rows.length);
  let n = 0;
  for (const i of rows) {
    const key = reviewKey(t.layers[t.layer[i]].name, t.unit[i]);
    if (inQueue(queue, byUnit.get(key), key, me, mark, merged)) out[n++] = i;
  }
  return out.slice(0, n);
}

const MARK_PREFIX = 'skein.merge.';
const DRAFT_PREFIX = 'skein.draft.';

export function readMergeMark(storage: Pick<Storage, 'getItem'>, study: string): MergeMark | null {
  try {
    const v = JSON.parse(storage.getItem(MARK_PREFIX + study) ?? 'null');
    return v && typeof v.at === 'string' && Array.isArray(v.units) ? v : null;
  } catch {
    return null;
  }
}

/** A note being typed, kept in the page's storage until it is saved, so a reload or a failed save loses nothing. */
export function readDraft(storage: Pick<Storage, 'getItem'>, study: string, key: string): string | null {
  return storage.getItem(DRAFT_PREFIX + study + '\u0000' + key);
}
export function writeDraft(storage: Pick<Storage, 'setItem' | 'removeItem'>, study: string, key: string, text: string | null): void {
  if (text === null) storage.removeItem(DRAFT_PREFIX + study + '\u0000' + key);
  else storage.setItem(DRAFT_PREFIX + study + '\u0000' + key, text);
}

export class ReviewSession {
  readonly study: string;
  reviewer = $state<string | null>(null);
  vocabulary = $state.raw<Response<'review.vocabulary'> | null>(null);
  byUnit = $state.raw<Map<string, ReviewRow>>(new Map());
  tagCounts = $state.raw<{ tag: string; count: number }[]>([]);
  error = $state.raw<ErrorInfo | null>(null);
  loaded = $state(false);
  queue = $state<Queue>('all');
  mark = $state.raw<MergeMark | null>(null);
  /** The preferences dialog is open (asked for by an edit, or by the user). */
  asking = $state(false);
  /** A one-line report of the last undo (or why it could not be done). */
  undoNote = $state.raw<{ text: string; error: boolean } | null>(null);
  #named: ((name: string | null) => void)[] = [];

  readonly #storage: Storage;

  constructor(study: string, storage: Storage) {
    this.study = study;
    this.#storage = storage;
    this.mark = readMergeMark(storage, study);
  }

  #loading: Promise<void> | null = null;

  /** Reads the reviewer's name, the vocabulary and the review list, once (later calls wait for the same read). */
  load(): Promise<void> {
    this.#loading ??= this.#read();
    return this.#loading;
  }

  async #read(): Promise<void> {
    try {
      const [prefs, vocabulary] = await Promise.all([call('prefs.get', {}), call('review.vocabulary', {})]);
      this.reviewer = prefs.reviewer;
      this.vocabulary = vocabulary;
      await this.refresh();
    } catch (e) {
      this.error = asErrorInfo(e);
    } finally {
      this.loaded = true;
    }
  }

  async refresh(): Promise<void> {
    const list = await call('review.list', { study: this.study });
    this.byUnit = rowsOfList(list);
    this.tagCounts = list.tagCounts;
    this.error = null;
  }

  row(layer: string, unit: number): ReviewRow | undefined {
    return this.byUnit.get(reviewKey(layer, unit));
  }

  /** Updates one unit's row after an edit, undo or resolution. */
  put(a: Annotation): void {
    const next = new Map(this.byUnit);
    next.set(reviewKey(a.layer, a.unit), rowOf(a));
    this.byUnit = next;
  }

  /** The reviewer's name, asking for it first when the preferences have none (null: the user declined). */
  async name(): Promise<string | null> {
    if (this.reviewer) return this.reviewer;
    this.asking = true;
    return new Promise((resolve) => this.#named.push(resolve));
  }

  /** Called by the preferences dialog when it closes. */
  named(name: string | null): void {
    if (name) this.reviewer = name;
    this.asking = false;
    const waiting = this.#named;
    this.#named = [];
    for (const resolve of waiting) resolve(name);
  }

  async edit(layer: string, unit: number, version: number, changes: EditChanges): Promise<EditOutcome> {
    const reviewer = await this.name();
    if (!reviewer) return { ok: false, error: { code: 'request', message: 'Set your reviewer name first: every review change is signed with it.' }, current: null };
    try {
      const annotation = await call('review.edit', { study: this.study, layer, unit, version, reviewer, changes });
      this.put(annotation);
      this.undoNote = null;
      return { ok: true, annotation };
    } catch (e) {
      const error = asErrorInfo(e);
      const current = error.code === 'conflict' ? ((error as ErrorInfo & { current?: Annotation }).current ?? null) : null;
      if (current) this.put(current);
      return { ok: false, error, current };
    }
  }

  /** Reverts this reviewer's newest edit in the study; the result is reported in `undoNote`. */
  async undo(): Promise<Annotation | null> {
    const reviewer = await this.name();
    if (!reviewer) return null;
    try {
      const r = await call('review.undo', { study: this.study, reviewer });
      if (!r.undone || !r.annotation) {
        this.undoNote = { text: 'Nothing of yours left to undo in this study.', error: false };
        return null;
      }
      this.put(r.annotation);
      const fields = r.undone.fields.map((f) => (f.startsWith('tag:') ? `tag ${f.slice(4)}` : f)).join(', ');
      this.undoNote = { text: `Undid your change of ${fields} on ${r.undone.layer} · ${r.undone.unit}.`, error: false };
      return r.annotation;
    } catch (e) {
      const error = asErrorInfo(e);
      const current = (error as ErrorInfo & { current?: Annotation }).current;
      if (current) this.put(current);
      this.undoNote = { text: error.message, error: true };
      return null;
    }
  }

  /** Remembers what a merge changed, for the "since merge" queue. */
  markMerge(units: string[]): void {
    const mark = { at: new Date().toISOString(), units: [...new Set(units)] };
    this.mark = mark;
    try {
      this.#storage.setItem(MARK_PREFIX + this.study, JSON.stringify(mark));
    } catch {
      // A full storage only loses the queue's memory of the merge, never review data.
    }
  }
}

/** A timestamp as a person reads it in a review list: "12 May 14:05" (this year) or "12 May 2024". */
export function when(iso: string | null): string {
  if (!iso) return '';
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  const sameYear = d.getFullYear() === new Date().getFullYear();
  const day = d.toLocaleDateString('en-GB', { day: 'numeric', month: 'short', ...(sameYear ? {} : { year: 'numeric' }) });
  return sameYear ? `${day} ${d.toLocaleTimeString('en-GB', { hour: '2-digit', minute: '2-digit' })}` : day;
}

/** A field name in words: "note", "status", "tag follow-up". */
export function fieldName(field: string): string {
  return field.startsWith('tag:') ? `tag ${field.slice(4)}` : field;
}
