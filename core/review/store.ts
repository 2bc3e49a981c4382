/**
 * Review annotations in the study file. `annotation_event` is the append-only history (merging unions it by event
 * id, see merge.ts); `annotation` is the current state per unit derived from it, plus `version`, the local
 * optimistic-concurrency counter: an edit names the version it was made on and is refused with a 'conflict' error
 * carrying the current annotation when another writer got there first. Every write is one IMMEDIATE transaction,
 * so two processes editing the same study serialise and the second sees the first's version.
 */
import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError, type ErrorInfo } from '../errors.ts';
import { now } from '../store/study.ts';
import { findLayer, readBinding } from '../store/binding.ts';
import {
  readAnnotationRow, listAnnotations, otherFingerprints, writeAnnotation, eventsOfUnit, findEvent, insertEvent, undoneEdits, localEditsNewestFirst,
  type Annotation, type Fingerprints, type StoredEvent, type UnitKey,
} from '../store/annotations.ts';
import { byField, commonBase, fieldOutcome, headsOf, newestFirst, type ReviewEvent } from './merge.ts';
import {
  DEFAULT_STATUS, MAX_TAGS_PER_UNIT, defaultValue, fieldLabel, isTagField, tagField, valueProblem,
  type Field, type FieldValue, type Status,
} from './vocabulary.ts';

export { listAnnotations, otherFingerprints, eventsOfUnit, findEvent, insertEvent };
export type { Annotation, Fingerprints, StoredEvent, UnitKey };

export interface ConflictSide { value: FieldValue; author: string | null; at: string | null }

/** A field both sides changed since their common history, with different results. */
export interface ConflictDetail {
  layer: string;
  unit: number;
  field: Field;
  /** The value in the newest history both sides share. */
  base: FieldValue;
  mine: ConflictSide;
  theirs: ConflictSide;
}

export type Resolution = { layer: string; unit: number; field: Field; keep: 'mine' | 'theirs' | { value: FieldValue } };

export interface EditChanges {
  /** The complete new tag set. */
  tags?: string[];
  addTags?: string[];
  removeTags?: string[];
  note?: string;
  status?: Status;
}

/** The 'conflict' error of an edit: its JSON form carries the current annotation so a screen can show it. */
export class ReviewConflictError extends SkeinError {
  readonly current: Annotation;
  constructor(info: Omit<ErrorInfo, 'code'>, current: Annotation) {
    super({ ...info, code: 'conflict' });
    this.current = current;
  }
  override toJSON(): ErrorInfo & { current: Annotation } {
    return { ...super.toJSON(), current: this.current };
  }
}

export function studyFingerprints(db: Database.Database, file?: string): Fingerprints {
  const binding = readBinding(db);
  if (!binding) throw new SkeinError({ code: 'study', file, message: 'This study has no scan yet, so there are no units to review. Run skein scan into it first.' });
  return { modelFp: binding.modelFp, probesFp: binding.probesFp };
}

/** The key of a unit of this study; the layer may be named by tensor or node name, the key uses the tensor name. */
export function unitKey(db: Database.Database, layer: string, unit: number, file?: string): UnitKey {
  const fps = studyFingerprints(db, file);
  const l = findLayer(db, layer, file);
  if (!Number.isInteger(unit) || unit < 0 || unit >= l.units) {
    throw new SkeinError({ code: 'request', file, where: 'unit', message: `Layer ${l.name} has units 0–${l.units - 1}; ${unit} is out of range.` });
  }
  return { ...fps, layer: l.name, unit };
}

export function emptyAnnotation(layer: string, unit: number): Annotation {
  return { layer, unit, tags: [], note: '', status: DEFAULT_STATUS, conflicts: [], reviewer: null, createdAt: null, updatedAt: null, version: 0 };
}

export function readAnnotation(db: Database.Database, key: UnitKey): Annotation {
  return readAnnotationRow(db, key) ?? emptyAnnotation(key.layer, key.unit);
}

/** The value an annotation shows for a field. */
export function valueOf(a: Annotation, field: Field): FieldValue {
  if (field === 'note') return a.note;
  if (field === 'status') return a.status;
  return a.tags.includes(field.slice(4));
}

/**
 * The state a unit's events lead to. Fields whose heads agree take that value; a field in conflict keeps the value
 * `prior` shows (this study's own), so a merge never overwrites what the reviewer here sees.
 */
export function deriveAnnotation(events: readonly ReviewEvent[], prior: Annotation): Annotation {
  const values = new Map<Field, FieldValue>();
  const conflicts: Field[] = [];
  const heads: ReviewEvent[] = [];
  for (const [field, list] of byField(events)) {
    const o = fieldOutcome(list);
    heads.push(...o.heads);
    if (o.value === undefined) {
      conflicts.push(field);
      values.set(field, valueOf(prior, field));
    } else {
      values.set(field, o.value);
    }
  }
  const tags = prior.tags.filter((t) => !values.has(tagField(t)));
  for (const [field, v] of values) if (isTagField(field) && v === true) tags.push(field.slice(4));
  tags.sort();
  const newest = [...heads].sort(newestFirst)[0];
  let createdAt: string | null = null;
  for (const e of events) if (createdAt === null || e.at < createdAt) createdAt = e.at;
  return {
    layer: prior.layer, unit: prior.unit, tags,
    note: (values.get('note') as string | undefined) ?? prior.note,
    status: (values.get('status') as Status | undefined) ?? prior.status,
    conflicts: conflicts.sort(),
    reviewer: newest?.author ?? prior.reviewer, createdAt: createdAt ?? prior.createdAt, updatedAt: newest?.at ?? prior.updatedAt,
    version: prior.version,
  };
}

/** Recomputes a unit's row from its events and writes it, one version on; refused if someone else wrote it meanwhile. */
export function rematerialize(db: Database.Database, key: UnitKey, prior: Annotation): Annotation {
  const next = { ...deriveAnnotation(eventsOfUnit(db, key), prior), version: prior.version + 1 };
  if (!writeAnnotation(db, key, next, prior.version)) throw staleVersion(db, key, prior.version);
  return next;
}

function staleVersion(db: Database.Database, key: UnitKey, seen: number): ReviewConflictError {
  const current = readAnnotation(db, key);
  const who = current.reviewer ? `${current.reviewer} changed` : 'Someone changed';
  return new ReviewConflictError({
    where: 'version',
    message: `${who} ${key.layer} unit ${key.unit} since you loaded it (you had version ${seen}, it is now ${current.version}); nothing was overwritten. Look at the current state and make your edit again.`,
  }, current);
}

function headsByField(events: readonly StoredEvent[]): Map<Field, string[]> {
  const out = new Map<Field, string[]>();
  for (const [field, list] of byField(events)) out.set(field, headsOf(list).map((h) => h.id));
  return out;
}

function uniqueSorted(xs: string[]): string[] {
  return [...new Set(xs)].sort();
}

/** The fields an edit changes, with their new values (no-op changes dropped). */
export function plannedChanges(current: Annotation, changes: EditChanges): { field: Field; value: FieldValue }[] {
  const out: { field: Field; value: FieldValue }[] = [];
  let tags = new Set(changes.tags ?? current.tags);
  for (const t of changes.addTags ?? []) tags.add(t);
  for (const t of changes.removeTags ?? []) tags.delete(t);
  tags = new Set(uniqueSorted([...tags]));
  for (const t of uniqueSorted([...current.tags, ...tags])) {
    const want = tags.has(t);
    if (want !== current.tags.includes(t)) out.push({ field: tagField(t), value: want });
  }
  if (changes.note !== undefined && changes.note !== current.note) out.push({ field: 'note', value: changes.note });
  if (changes.status !== undefined && changes.status !== current.status) out.push({ field: 'status', value: changes.status });
  if (tags.size > MAX_TAGS_PER_UNIT) {
    throw new SkeinError({ code: 'request', where: 'changes.tags', message: `A unit can carry at most ${MAX_TAGS_PER_UNIT} tags; this edit would give it ${tags.size}. Remove some first.` });
  }
  return out;
}

/** Writes new events for `changes` on one unit, each replacing its field's current heads (which resolves a conflict). */
function writeChanges(db: Database.Database, key: UnitKey, prior: Annotation, changes: { field: Field; value: FieldValue }[],
  author: string, undoes: string | null = null): Annotation {
  const heads = headsByField(eventsOfUnit(db, key));
  const edit = crypto.randomUUID();
  const at = now();
  for (const c of changes) {
    insertEvent(db, key, {
      id: crypto.randomUUID(), field: c.field, old: valueOf(prior, c.field), new: c.value,
      parents: heads.get(c.field) ?? [], author, at, edit, undoes,
    }, 'local');
  }
  return rematerialize(db, key, prior);
}

/** One reviewer's edit of one unit, made on `version`; returns the new annotation once committed. */
export function editUnit(db: Database.Database, key: UnitKey, version: number, reviewer: string, changes: EditChanges): Annotation {
  return db.transaction(() => {
    const prior = readAnnotation(db, key);
    if (prior.version !== version) throw staleVersion(db, key, version);
    const planned = plannedChanges(prior, changes);
    if (!planned.length) return prior;
    return writeChanges(db, key, prior, planned, reviewer);
  }).immediate();
}

export interface UndoResult {
  /** The edit that was reverted, or null when this reviewer has nothing left to undo here. */
  undone: { edit: string; layer: string; unit: number; fields: Field[]; at: string } | null;
  annotation: Annotation | null;
}

/** Reverts this reviewer's newest edit not yet undone (in this study's current fingerprints) with new events. */
export function undoLast(db: Database.Database, fps: Fingerprints, reviewer: string): UndoResult {
  return db.transaction((): UndoResult => {
    const undone = undoneEdits(db, fps);
    const candidates = localEditsNewestFirst(db, fps, reviewer);
    let target: { edit: string; layer: string; unit: number } | null = null;
    for (const c of candidates) if (!undone.has(c.edit)) { target = c; break; }
    if (!target) return { undone: null, annotation: null };
    const key = { ...fps, layer: target.layer, unit: target.unit };
    const prior = readAnnotation(db, key);
    const events = eventsOfUnit(db, key).filter((e) => e.edit === target.edit);
    for (const e of events) {
      if (prior.conflicts.includes(e.field) || valueOf(prior, e.field) !== e.new) {
        throw new ReviewConflictError({
          where: e.field,
          message: `The ${fieldLabel(e.field)} of ${key.layer} unit ${key.unit} changed after your edit${prior.reviewer && prior.reviewer !== reviewer ? ` (by ${prior.reviewer})` : ''}; undoing would overwrite that change, so nothing was undone. Edit the unit by hand instead.`,
        }, prior);
      }
    }
    const annotation = writeChanges(db, key, prior, events.map((e) => ({ field: e.field, value: e.old })), reviewer, target.edit);
    return { undone: { edit: target.edit, layer: key.layer, unit: key.unit, fields: events.map((e) => e.field), at: events[0].at }, annotation };
  }).immediate();
}

/** Details of a unit's unresolved conflicts: this study's value against the newest differing head. */
export function conflictDetails(annotation: Annotation, events: readonly ReviewEvent[]): ConflictDetail[] {
  const fields = byField(events);
  return annotation.conflicts.map((field) => {
    const list = fields.get(field) ?? [];
    const heads = headsOf(list).sort(newestFirst);
    const mineValue = valueOf(annotation, field);
    const mineHead = heads.find((h) => h.new === mineValue) ?? null;
    const theirsHead = heads.find((h) => h.new !== mineValue)!;
    return {
      layer: annotation.layer, unit: annotation.unit, field,
      base: mineHead ? commonBase(field, mineHead, theirsHead, list) : defaultValue(field),
      mine: { value: mineValue, author: mineHead?.author ?? null, at: mineHead?.at ?? null },
      theirs: { value: theirsHead.new, author: theirsHead.author, at: theirsHead.at },
    };
  });
}

export function resolvedValue(c: ConflictDetail, keep: Resolution['keep']): FieldValue {
  return keep === 'mine' ? c.mine.value : keep === 'theirs' ? c.theirs.value : keep.value;
}

/** Resolves stored conflicts: per unit, one edit whose events replace every head of each resolved field. */
export function resolveStored(db: Database.Database, fps: Fingerprints, reviewer: string, resolutions: Resolution[]): Annotation[] {
  return db.transaction(() => {
    const byUnit = new Map<string, Resolution[]>();
    for (const r of resolutions) {
      const k = `${r.layer}\u0000${r.unit}`;
      byUnit.set(k, [...(byUnit.get(k) ?? []), r]);
    }
    const out: Annotation[] = [];
    for (const list of byUnit.values()) {
      const key = { ...fps, layer: list[0].layer, unit: list[0].unit };
      const prior = readAnnotation(db, key);
      const details = conflictDetails(prior, eventsOfUnit(db, key));
      const changes = list.map((r) => {
        const c = details.find((d) => d.field === r.field);
        if (!c) throw new SkeinError({ code: 'request', where: `${r.layer} unit ${r.unit} ${r.field}`, message: `There is no unresolved conflict on the ${fieldLabel(r.field)} of ${r.layer} unit ${r.unit}; reload the unit to see its state.` });
        const value = resolvedValue(c, r.keep);
        const problem = valueProblem(r.field, value);
        if (problem) throw new SkeinError({ code: 'request', where: `${r.layer} unit ${r.unit} ${r.field}`, message: `The value chosen for the ${fieldLabel(r.field)} of ${r.layer} unit ${r.unit} is not valid: ${problem}.` });
        return { field: r.field, value };
      });
      out.push(writeChanges(db, key, prior, changes, reviewer));
    }
    return out;
  }).immediate();
}
