/**
 * The annotations repository: `annotation` (the current review state per unit, a cache derived from the history, with
 * its optimistic-concurrency version) and `annotation_event` (the append-only history bundles carry). The only code
 * that reads or writes those tables and the only decoder of their JSON columns. The rules (deriving, conflicts, undo)
 * live in core/review.
 */
import type Database from 'better-sqlite3';
import type { ReviewEvent } from '../review/merge.ts';
import type { Field, Status } from '../review/vocabulary.ts';

export interface Fingerprints { modelFp: string; probesFp: string }
export interface UnitKey extends Fingerprints { layer: string; unit: number }

/** One unit's review state as the screens show it. */
export interface Annotation {
  layer: string;
  unit: number;
  /** Sorted. */
  tags: string[];
  /** Plain text / Markdown source; render with renderNote. */
  note: string;
  status: Status;
  /** Fields changed on two sides that nobody has resolved yet; the value shown for them is this study's own. */
  conflicts: Field[];
  /** Who made the newest change, and when; null for a unit nobody annotated. */
  reviewer: string | null;
  createdAt: string | null;
  updatedAt: string | null;
  /** Send this back with the next edit; 0 for a unit nobody annotated. */
  version: number;
}

export interface StoredEvent extends ReviewEvent {
  /** Local arrival order. */
  seq: number;
  origin: 'local' | 'import';
  /** The bundle's own event id when the event was imported under a layer mapping. */
  sourceId: string | null;
}

interface AnnotationRow {
  layer: string; unit: number; tags: string; note: string; status: string; conflicts: string;
  reviewer: string | null; created_at: string | null; updated_at: string | null; version: number;
}

function fromRow(r: AnnotationRow): Annotation {
  return {
    layer: r.layer, unit: r.unit, tags: JSON.parse(r.tags), note: r.note, status: r.status as Status,
    conflicts: JSON.parse(r.conflicts), reviewer: r.reviewer, createdAt: r.created_at, updatedAt: r.updated_at, version: r.version,
  };
}

/** The stored annotation of a unit, or null when nobody annotated it. */
export function readAnnotationRow(db: Database.Database, key: UnitKey): Annotation | null {
  const r = db.prepare(`SELECT * FROM annotation WHERE model_fp = ? AND probes_fp = ? AND layer = ? AND unit = ?`)
    .get(key.modelFp, key.probesFp, key.layer, key.unit) as AnnotationRow | undefined;
  return r ? fromRow(r) : null;
}

/** Annotations of the given fingerprints, by layer then unit. */
export function listAnnotations(db: Database.Database, fps: Fingerprints): Annotation[] {
  return (db.prepare(`SELECT * FROM annotation WHERE model_fp = ? AND probes_fp = ? ORDER BY layer, unit`).all(fps.modelFp, fps.probesFp) as AnnotationRow[]).map(fromRow);
}

/** Annotated units kept for other model / probe-set fingerprints (earlier scans of this study). */
export function otherFingerprints(db: Database.Database, fps: Fingerprints): { modelFp: string; probesFp: string; units: number }[] {
  return (db.prepare(`SELECT model_fp, probes_fp, count(*) AS n FROM annotation WHERE NOT (model_fp = ? AND probes_fp = ?) GROUP BY 1, 2 ORDER BY 1, 2`)
    .all(fps.modelFp, fps.probesFp) as { model_fp: string; probes_fp: string; n: number }[]).map((r) => ({ modelFp: r.model_fp, probesFp: r.probes_fp, units: r.n }));
}

/**
 * Writes a unit's annotation as `next` only if its stored version is still `priorVersion` (0: not stored yet).
 * Returns false when another writer got there first.
 */
export function writeAnnotation(db: Database.Database, key: UnitKey, next: Annotation, priorVersion: number): boolean {
  const r = db.prepare(`INSERT INTO annotation (model_fp, probes_fp, layer, unit, tags, note, status, conflicts, reviewer, created_at, updated_at, version)
      VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
      ON CONFLICT (model_fp, probes_fp, layer, unit) DO UPDATE SET tags = excluded.tags, note = excluded.note, status = excluded.status,
        conflicts = excluded.conflicts, reviewer = excluded.reviewer, created_at = excluded.created_at, updated_at = excluded.updated_at,
        version = excluded.version
      WHERE annotation.version = ?`)
    .run(key.modelFp, key.probesFp, key.layer, key.unit, JSON.stringify(next.tags), next.note, next.status, JSON.stringify(next.conflicts),
      next.reviewer, next.createdAt, next.updatedAt, next.version, priorVersion);
  return r.changes === 1;
}

interface EventRow {
  seq: number; id: string; field: string; old_value: string; new_value: string; parents: string;
  author: string; at: string; edit: string; undoes: string | null; origin: string; source_id: string | null;
}

function eventFromRow(r: EventRow): StoredEvent {
  return {
    seq: r.seq, id: r.id, field: r.field as Field, old: JSON.parse(r.old_value), new: JSON.parse(r.new_value),
    parents: JSON.parse(r.parents), author: r.author, at: r.at, edit: r.edit, undoes: r.undoes,
    origin: r.origin as StoredEvent['origin'], sourceId: r.source_id,
  };
}

/** One unit's whole history, in local arrival order (parents always before their children). */
export function eventsOfUnit(db: Database.Database, key: UnitKey): StoredEvent[] {
  return (db.prepare(`SELECT * FROM annotation_event WHERE model_fp = ? AND probes_fp = ? AND layer = ? AND unit = ? ORDER BY seq`)
    .all(key.modelFp, key.probesFp, key.layer, key.unit) as EventRow[]).map(eventFromRow);
}

export function findEvent(db: Database.Database, id: string): (StoredEvent & UnitKey) | null {
  const r = db.prepare(`SELECT * FROM annotation_event WHERE id = ?`).get(id) as (EventRow & { model_fp: string; probes_fp: string; layer: string; unit: number }) | undefined;
  return r ? { ...eventFromRow(r), modelFp: r.model_fp, probesFp: r.probes_fp, layer: r.layer, unit: r.unit } : null;
}

/** Appends one event to the history (the table refuses updates and deletes). */
export function insertEvent(db: Database.Database, key: UnitKey, e: ReviewEvent, origin: StoredEvent['origin'], sourceId: string | null = null): void {
  db.prepare(`INSERT INTO annotation_event (id, model_fp, probes_fp, layer, unit, field, old_value, new_value, parents, author, at, edit, undoes, origin, source_id)
              VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
    .run(e.id, key.modelFp, key.probesFp, key.layer, key.unit, e.field, JSON.stringify(e.old), JSON.stringify(e.new),
      JSON.stringify(e.parents), e.author, e.at, e.edit, e.undoes, origin, sourceId);
}

/** Ids of the edits already undone under these fingerprints. */
export function undoneEdits(db: Database.Database, fps: Fingerprints): Set<string> {
  return new Set(db.prepare(`SELECT DISTINCT undoes FROM annotation_event WHERE undoes IS NOT NULL AND model_fp = ? AND probes_fp = ?`)
    .pluck().all(fps.modelFp, fps.probesFp) as string[]);
}

/** This author's own local edits that are not undos, newest first (one entry per event). */
export function* localEditsNewestFirst(db: Database.Database, fps: Fingerprints, author: string): Generator<{ edit: string; layer: string; unit: number }> {
  yield* db.prepare(`SELECT edit, layer, unit FROM annotation_event WHERE model_fp = ? AND probes_fp = ? AND author = ? AND origin = 'local' AND undoes IS NULL ORDER BY seq DESC`)
    .iterate(fps.modelFp, fps.probesFp, author) as IterableIterator<{ edit: string; layer: string; unit: number }>;
}
