/**
 * Review bundles: the JSON file a reviewer sends a colleague. It carries the fingerprints of the model and probe set,
 * the exporting study's layers, and the full event history of each unit it covers (so every parent an event names is
 * inside the bundle). Reading one is strict: size is checked before reading, duplicate keys, unknown fields, wrong
 * types and broken histories are refused with the place at fault, before anything is written.
 */
import fs from 'node:fs';
import path from 'node:path';
import { z } from 'zod';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { now } from '../store/study.ts';
import { readLayers } from '../store/binding.ts';
import { readJsonStrict, JsonReadError } from './json.ts';
import { filterSchema, type ReviewFilter } from './vocabulary.ts';
import { eventsOfUnit, type Annotation, type Fingerprints } from './store.ts';
import { fieldProblem, reviewerSchema, valueProblem, MAX_TAG_LENGTH, type Field } from './vocabulary.ts';
import type { ReviewEvent } from './merge.ts';

export const BUNDLE_KIND = 'skein-review-bundle';
export const BUNDLE_SCHEMA = 1;
/** Larger files are refused before reading: a bundle of every unit of a big study is a few MB. */
export const MAX_BUNDLE_BYTES = 50 * 1024 * 1024;

const UUID = /^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$/;
const uuid = z.string().regex(UUID, 'an id is a lowercase UUID such as 0f8e4d2a-5b1c-4e7a-9c3d-2a1b0c9d8e7f');
const isoTime = z.iso.datetime({ offset: true, message: 'a time is an ISO 8601 date-time such as 2025-03-01T09:30:00.000Z' });
const fingerprint = z.string().min(1).max(256);
const value = z.union([z.string(), z.boolean()], { error: 'a value is text (note, status) or true/false (tag)' });

const eventSchema = z.strictObject({
  id: uuid,
  field: z.string().min(1).max(MAX_TAG_LENGTH + 4),
  old: value,
  new: value,
  parents: z.array(uuid).max(256),
  author: reviewerSchema,
  at: isoTime,
  edit: uuid,
  undoes: uuid.nullable(),
});

const unitSchema = z.strictObject({
  layer: z.string().min(1).max(1024),
  unit: z.number().int().min(0).max(2 ** 31),
  events: z.array(eventSchema).min(1).max(100_000),
});

export const bundleSchema = z.strictObject({
  kind: z.literal(BUNDLE_KIND),
  schema: z.literal(BUNDLE_SCHEMA),
  exportedAt: isoTime,
  exportedBy: reviewerSchema.nullable(),
  model: z.strictObject({ fingerprint }),
  probes: z.strictObject({ fingerprint, name: z.string().max(1024) }),
  layers: z.array(z.strictObject({ name: z.string().min(1).max(1024), units: z.number().int().min(1) })).max(10_000),
  filter: filterSchema.nullable(),
  units: z.array(unitSchema).max(1_000_000),
});

export type ReviewBundle = z.infer<typeof bundleSchema>;
export type BundleUnit = ReviewBundle['units'][number];

function bundleError(file: string | undefined, where: string | undefined, message: string): SkeinError {
  return new SkeinError({ code: 'review', file, where, message: `${message} Nothing was imported.` });
}

/** "units[3].events[0].at" from a zod issue path. */
export function pathText(p: readonly PropertyKey[]): string {
  return p.map((k, i) => (typeof k === 'number' ? `[${k}]` : i === 0 ? String(k) : `.${String(k)}`)).join('') || '(top level)';
}

/** Reads and fully checks a bundle file. Throws a 'review' SkeinError naming the problem; never writes. */
export function readBundleFile(file: string): ReviewBundle {
  const abs = path.resolve(file);
  let size: number;
  try {
    const st = fs.statSync(abs);
    if (st.isDirectory()) throw bundleError(abs, undefined, 'This is a folder, not a review bundle file.');
    size = st.size;
  } catch (e) {
    if (e instanceof SkeinError) throw e;
    throw bundleError(abs, undefined, 'There is no file here. Check the path of the review bundle.');
  }
  if (size > MAX_BUNDLE_BYTES) {
    throw bundleError(abs, undefined, `The file is ${(size / 1048576).toFixed(1)} MB; a review bundle is at most ${MAX_BUNDLE_BYTES / 1048576} MB, so this is not one (or it was damaged). Ask for a bundle of fewer units (export with a filter).`);
  }
  const bytes = fs.readFileSync(abs);
  return parseBundleText(bytes, abs);
}

/** Checks bundle bytes: UTF-8, strict JSON, the schema, then the histories. */
export function parseBundleText(bytes: Uint8Array, file?: string): ReviewBundle {
  if (bytes.byteLength > MAX_BUNDLE_BYTES) throw bundleError(file, undefined, `The bundle is larger than ${MAX_BUNDLE_BYTES / 1048576} MB.`);
  let text: string;
  try {
    text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    throw bundleError(file, undefined, 'The file is not UTF-8 text, so it is not a review bundle.');
  }
  if (text.trim() === '') throw bundleError(file, undefined, 'The file is empty; a review bundle is a JSON file exported by Skein.');
  let json: unknown;
  try {
    json = readJsonStrict(text, { maxDepth: 16 });
  } catch (e) {
    if (e instanceof JsonReadError) throw bundleError(file, `line ${e.line}, column ${e.column}`, `The bundle is not valid JSON: ${e.message}.`);
    throw e;
  }
  return checkBundle(json, file);
}

export function checkBundle(json: unknown, file?: string): ReviewBundle {
  if (typeof json !== 'object' || json === null || Array.isArray(json)) throw bundleError(file, '(top level)', 'A review bundle is a JSON object; this file holds something else.');
  const head = json as Record<string, unknown>;
  if (head.kind !== BUNDLE_KIND) throw bundleError(file, 'kind', `This JSON is not a Skein review bundle (its "kind" is ${JSON.stringify(head.kind ?? null)?.slice(0, 60)}, expected "${BUNDLE_KIND}").`);
  if (typeof head.schema === 'number' && head.schema > BUNDLE_SCHEMA) {
    throw bundleError(file, 'schema', `The bundle uses schema ${head.schema}, newer than this Skein understands (${BUNDLE_SCHEMA}). Update Skein to import it.`);
  }
  const r = bundleSchema.safeParse(json);
  if (!r.success) {
    const issue = r.error.issues[0];
    const extra = issue.code === 'unrecognized_keys' ? `unknown field${issue.keys.length > 1 ? 's' : ''} ${issue.keys.map((k) => `"${k}"`).join(', ')} (a bundle holds only the fields Skein writes)` : issue.message;
    const more = r.error.issues.length > 1 ? ` (and ${r.error.issues.length - 1} more problem${r.error.issues.length > 2 ? 's' : ''})` : '';
    throw bundleError(file, pathText(issue.path), `The bundle is invalid at ${pathText(issue.path)}: ${extra}${more}.`);
  }
  checkHistories(r.data, file);
  return r.data;
}

/** Layers named once, units once, ids once, values fit their fields, and every parent precedes its child. */
function checkHistories(b: ReviewBundle, file?: string): void {
  const layers = new Map<string, number>();
  b.layers.forEach((l, i) => {
    if (layers.has(l.name)) throw bundleError(file, `layers[${i}]`, `The layer "${l.name}" is listed twice.`);
    layers.set(l.name, l.units);
  });
  const units = new Set<string>();
  const ids = new Set<string>();
  b.units.forEach((u, i) => {
    const at = `units[${i}]`;
    const count = layers.get(u.layer);
    if (count === undefined) throw bundleError(file, `${at}.layer`, `Unit ${u.unit} belongs to layer "${u.layer}", which the bundle's layer list does not name.`);
    if (u.unit >= count) throw bundleError(file, `${at}.unit`, `Layer "${u.layer}" has ${count} units, so unit ${u.unit} does not exist.`);
    const k = `${u.layer}\u0000${u.unit}`;
    if (units.has(k)) throw bundleError(file, at, `${u.layer} unit ${u.unit} appears twice; a bundle lists each unit once.`);
    units.add(k);
    const seenHere = new Map<string, Field>();
    u.events.forEach((e, j) => {
      const where = `${at}.events[${j}]`;
      if (ids.has(e.id)) throw bundleError(file, `${where}.id`, `The event id ${e.id} appears twice.`);
      ids.add(e.id);
      const fp = fieldProblem(e.field);
      if (fp) throw bundleError(file, `${where}.field`, `The event changes an unknown field: ${fp}.`);
      const field = e.field as Field;
      for (const [name, v] of [['old', e.old], ['new', e.new]] as const) {
        const vp = valueProblem(field, v);
        if (vp) throw bundleError(file, `${where}.${name}`, `The ${name} value does not fit the field ${e.field}: ${vp}.`);
      }
      if (new Set(e.parents).size !== e.parents.length) throw bundleError(file, `${where}.parents`, 'An event names the same parent twice.');
      for (const p of e.parents) {
        const pf = seenHere.get(p);
        if (pf === undefined) throw bundleError(file, `${where}.parents`, `The event names a parent (${p}) that does not come before it in this unit's history: the history is incomplete or reordered.`);
        if (pf !== field) throw bundleError(file, `${where}.parents`, `The event on ${e.field} names a parent that changed ${pf}; parents change the same field.`);
      }
      seenHere.set(e.id, field);
    });
  });
}

/** Builds a bundle of the given annotations' full histories. */
export function buildBundle(db: Database.Database, fps: Fingerprints, probesName: string, annotations: readonly Annotation[],
  exportedBy: string | null, filter: ReviewFilter | null): ReviewBundle {
  const layers = readLayers(db).map((l) => ({ name: l.name, units: l.units }));
  const units: BundleUnit[] = [];
  for (const a of annotations) {
    const events = eventsOfUnit(db, { ...fps, layer: a.layer, unit: a.unit });
    if (!events.length) continue;
    units.push({ layer: a.layer, unit: a.unit, events: events.map(toBundleEvent) });
  }
  return {
    kind: BUNDLE_KIND, schema: BUNDLE_SCHEMA, exportedAt: now(), exportedBy,
    model: { fingerprint: fps.modelFp }, probes: { fingerprint: fps.probesFp, name: probesName },
    layers, filter, units,
  };
}

export function toBundleEvent(e: ReviewEvent): BundleUnit['events'][number] {
  return { id: e.id, field: e.field, old: e.old, new: e.new, parents: [...e.parents], author: e.author, at: e.at, edit: e.edit, undoes: e.undoes };
}
