/**
 * The merge algebra of review history. Every change to one field of one unit is an event naming the events it
 * replaced (`parents`: that field's latest events where the edit was made), so each field's history is a small DAG.
 * A study's review state is a function of its event SET: merging two studies is the union of their events by id,
 * hence idempotent, commutative and associative. A field's value is the value of its latest events (the heads, those
 * no other event replaced); when the heads disagree, both sides changed the field since their common history and the
 * field is in conflict until someone writes an event replacing all heads.
 */
import { defaultValue, type Field, type FieldValue } from './vocabulary.ts';

export interface ReviewEvent {
  id: string;
  field: Field;
  old: FieldValue;
  new: FieldValue;
  parents: string[];
  author: string;
  at: string;
  edit: string;
  undoes: string | null;
}

/** The events of one field that no other event of it replaced. */
export function headsOf<E extends ReviewEvent>(events: readonly E[]): E[] {
  const replaced = new Set<string>();
  for (const e of events) for (const p of e.parents) replaced.add(p);
  return events.filter((e) => !replaced.has(e.id));
}

export interface FieldOutcome<E extends ReviewEvent = ReviewEvent> {
  heads: E[];
  /** The value every head agrees on; undefined when they disagree (a conflict). */
  value: FieldValue | undefined;
}

export function fieldOutcome<E extends ReviewEvent>(events: readonly E[]): FieldOutcome<E> {
  const heads = headsOf(events);
  const values = new Set(heads.map((h) => h.new));
  return { heads, value: values.size === 1 ? heads[0].new : undefined };
}

/** Newest first by time, ties broken by id, so every study orders the same events the same way. */
export function newestFirst(a: ReviewEvent, b: ReviewEvent): number {
  return a.at < b.at ? 1 : a.at > b.at ? -1 : a.id < b.id ? 1 : a.id > b.id ? -1 : 0;
}

/** All events a given event descends from (not including itself). */
export function ancestorsOf(id: string, byId: ReadonlyMap<string, ReviewEvent>): Set<string> {
  const seen = new Set<string>();
  const stack = [...(byId.get(id)?.parents ?? [])];
  while (stack.length) {
    const p = stack.pop()!;
    if (seen.has(p)) continue;
    seen.add(p);
    for (const q of byId.get(p)?.parents ?? []) stack.push(q);
  }
  return seen;
}

/** The field's value in the newest history both heads share (the default value when they share none). */
export function commonBase(field: Field, a: ReviewEvent, b: ReviewEvent, events: readonly ReviewEvent[]): FieldValue {
  const byId = new Map(events.map((e) => [e.id, e]));
  const ofA = ancestorsOf(a.id, byId).add(a.id);
  const ofB = ancestorsOf(b.id, byId).add(b.id);
  const shared = events.filter((e) => ofA.has(e.id) && ofB.has(e.id));
  if (!shared.length) return defaultValue(field);
  return [...headsOf(shared)].sort(newestFirst)[0].new;
}

/** Groups events by field, keeping their order. */
export function byField<E extends ReviewEvent>(events: readonly E[]): Map<Field, E[]> {
  const out = new Map<Field, E[]>();
  for (const e of events) {
    const list = out.get(e.field);
    if (list) list.push(e);
    else out.set(e.field, [e]);
  }
  return out;
}
