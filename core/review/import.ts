/**
 * Importing a colleague's bundle: check its fingerprints (another model or probe set needs a confirmed mapping of
 * layers), then take the union of its events with this study's. Fields only one side changed merge; fields both
 * changed since their common history to different values are conflicts: listed, kept as this study shows them, and
 * resolved by an edit (this study's value, the bundle's, or a new one). The plan is computed without writing (preview); the
 * import recomputes it inside one IMMEDIATE transaction and writes it whole, or nothing.
 */
import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readLayers, type LayerRow } from '../store/binding.ts';
import type { ReviewBundle } from './bundle.ts';
import type { ReviewEvent } from './merge.ts';
import {
  conflictDetails, deriveAnnotation, eventsOfUnit, findEvent, insertEvent, readAnnotation, rematerialize, resolveStored,
  studyFingerprints, valueOf, type Annotation, type ConflictDetail, type Fingerprints, type Resolution, type UnitKey,
} from './store.ts';
import { byField, headsOf } from './merge.ts';
import type { Field, FieldValue } from './vocabulary.ts';

/** How bundle layers map onto this study's layers when the fingerprints differ: by equal names, or explicitly. */
export type LayerMapping = 'by-name' | Record<string, string>;

export interface FingerprintCheck {
  model: { bundle: string; study: string; same: boolean };
  probes: { bundle: string; study: string; same: boolean; bundleName: string };
  /** Both fingerprints equal: the bundle's units are this study's units. */
  same: boolean;
  /** For a mismatch: each bundle layer's same-named study layer when its units fit, else null. */
  proposedMapping: Record<string, string | null>;
}

export interface FieldChange { layer: string; unit: number; field: Field; from: FieldValue; to: FieldValue; author: string }

export interface ImportPlan {
  check: FingerprintCheck;
  /** The bundle-layer → study-layer mapping used (identity when the fingerprints match). */
  mapping: Record<string, string>;
  bundleEvents: number;
  newEvents: number;
  knownEvents: number;
  /** Non-conflicting value changes the import makes. */
  changes: FieldChange[];
  /** Conflicts on the bundle's units after the merge (before any resolution). */
  conflicts: ConflictDetail[];
  units: PlannedUnit[];
}

interface PlannedUnit {
  key: UnitKey;
  prior: Annotation;
  fresh: { event: ReviewEvent; sourceId: string | null }[];
}

export interface ImportResult {
  merged: { newEvents: number; knownEvents: number; unitsChanged: number; fieldsChanged: number; resolved: number };
  changes: FieldChange[];
  /** Conflicts still unresolved on the bundle's units; the import succeeded but these need a decision. */
  conflicts: ConflictDetail[];
  mapping: Record<string, string>;
  fingerprintsMatched: boolean;
}

function refuse(file: string | undefined, where: string | undefined, message: string): SkeinError {
  return new SkeinError({ code: 'review', file, where, message: `${message} Nothing was imported.` });
}

const short = (fp: string) => fp.slice(0, 12);

export function checkFingerprints(db: Database.Database, bundle: ReviewBundle): FingerprintCheck {
  const fps = studyFingerprints(db);
  const study = new Map(readLayers(db).map((l) => [l.name, l]));
  const model = { bundle: bundle.model.fingerprint, study: fps.modelFp, same: bundle.model.fingerprint === fps.modelFp };
  const probes = { bundle: bundle.probes.fingerprint, study: fps.probesFp, same: bundle.probes.fingerprint === fps.probesFp, bundleName: bundle.probes.name };
  const proposedMapping: Record<string, string | null> = {};
  for (const l of bundle.layers) {
    const s = study.get(l.name);
    proposedMapping[l.name] = s && s.units >= maxUnit(bundle, l.name) + 1 ? s.name : null;
  }
  return { model, probes, same: model.same && probes.same, proposedMapping };
}

function maxUnit(bundle: ReviewBundle, layer: string): number {
  let m = -1;
  for (const u of bundle.units) if (u.layer === layer && u.unit > m) m = u.unit;
  return m;
}

/** The layer mapping to use, or a refusal naming what the user must confirm or fix. */
function resolveMapping(db: Database.Database, bundle: ReviewBundle, check: FingerprintCheck, mapping: LayerMapping | undefined, file?: string): Record<string, string> {
  const study = new Map(readLayers(db).map((l) => [l.name, l]));
  const used = [...new Set(bundle.units.map((u) => u.layer))];
  const out: Record<string, string> = {};
  if (check.same) {
    for (const l of used) {
      if (!study.has(l)) throw refuse(file, `layer ${l}`, `The bundle annotates layer "${l}", which this study has not scanned. Scan it (skein scan … --layers ${l}) and import again.`);
      out[l] = l;
    }
    return out;
  }
  if (!mapping) {
    const what = [!check.model.same ? `model (bundle ${short(check.model.bundle)}…, this study ${short(check.model.study)}…)` : null,
      !check.probes.same ? `probe set (bundle "${check.probes.bundleName}" ${short(check.probes.bundle)}…, this study ${short(check.probes.study)}…)` : null].filter(Boolean).join(' and ');
    throw refuse(file, 'fingerprints', `This bundle was made for another ${what}. Import it only if its units correspond to this study's: confirm a mapping of layers by name (CLI: --map-by-name or --map bundleLayer=studyLayer).`);
  }
  const mapped = new Map<string, string>();
  for (const l of used) {
    const target = mapping === 'by-name' ? l : mapping[l];
    if (target === undefined) throw refuse(file, `mapping.${l}`, `The mapping does not say where the bundle's layer "${l}" goes. Map every annotated layer: ${used.join(', ')}.`);
    const s: LayerRow | undefined = study.get(target);
    if (!s) throw refuse(file, `mapping.${l}`, `The bundle's layer "${l}" is mapped to "${target}", which is not a layer of this study (layers: ${[...study.keys()].join(', ')}).`);
    const top = maxUnit(bundle, l);
    if (top >= s.units) throw refuse(file, `mapping.${l}`, `The bundle annotates unit ${top} of "${l}", but "${s.name}" here has only ${s.units} units, so the layers do not correspond.`);
    const other = mapped.get(s.name);
    if (other !== undefined) throw refuse(file, `mapping.${l}`, `Both "${other}" and "${l}" are mapped onto "${s.name}"; map each bundle layer to its own layer.`);
    mapped.set(s.name, l);
    out[l] = s.name;
  }
  return out;
}

/** Event ids under a mapping: derived from the bundle's id and this study's fingerprints, so re-importing is idempotent. */
export function mappedId(id: string, fps: Fingerprints): string {
  const h = crypto.createHash('sha256').update(`${id}\u0000${fps.modelFp}\u0000${fps.probesFp}`).digest('hex');
  // RFC 9562 UUIDv8 layout (version 8, variant 10xx): ours, computed, still a valid UUID.
  return `${h.slice(0, 8)}-${h.slice(8, 12)}-8${h.slice(13, 16)}-${((parseInt(h[16], 16) & 3) | 8).toString(16)}${h.slice(17, 20)}-${h.slice(20, 32)}`;
}

function sameEvent(a: ReviewEvent, b: ReviewEvent): boolean {
  return a.field === b.field && a.old === b.old && a.new === b.new && a.author === b.author && a.at === b.at && a.edit === b.edit &&
    a.undoes === b.undoes && a.parents.length === b.parents.length && a.parents.every((p, i) => p === b.parents[i]);
}

/** What importing the bundle would do, computed without writing. */
export function planImport(db: Database.Database, bundle: ReviewBundle, opts: { mapping?: LayerMapping; file?: string } = {}): ImportPlan {
  const fps = studyFingerprints(db, opts.file);
  const check = checkFingerprints(db, bundle);
  const mapping = resolveMapping(db, bundle, check, opts.mapping, opts.file);
  const rekey = (id: string) => (check.same ? id : mappedId(id, fps));
  let newEvents = 0;
  let knownEvents = 0;
  const changes: FieldChange[] = [];
  const conflicts: ConflictDetail[] = [];
  const units: PlannedUnit[] = [];
  const taken = new Set<string>();
  bundle.units.forEach((u, i) => {
    const key: UnitKey = { ...fps, layer: mapping[u.layer], unit: u.unit };
    const fresh: PlannedUnit['fresh'] = [];
    for (const [j, e] of u.events.entries()) {
      const event: ReviewEvent = {
        id: rekey(e.id), field: e.field as Field, old: e.old, new: e.new, parents: e.parents.map(rekey),
        author: e.author, at: e.at, edit: rekey(e.edit), undoes: e.undoes === null ? null : rekey(e.undoes),
      };
      const local = findEvent(db, event.id);
      if (local) {
        if (local.modelFp !== key.modelFp || local.probesFp !== key.probesFp || local.layer !== key.layer || local.unit !== key.unit || !sameEvent(local, event)) {
          throw refuse(opts.file, `units[${i}].events[${j}]`, `The event ${e.id} differs from the event with the same id in this study: the bundle was altered after export.`);
        }
        knownEvents++;
      } else {
        if (taken.has(event.id)) throw refuse(opts.file, `units[${i}].events[${j}]`, `The event ${e.id} appears twice once layers are mapped.`);
        taken.add(event.id);
        fresh.push({ event, sourceId: check.same ? null : e.id });
        newEvents++;
      }
    }
    const prior = readAnnotation(db, key);
    const local = eventsOfUnit(db, key);
    const merged = [...local, ...fresh.map((f) => f.event)];
    const after = fresh.length ? deriveAnnotation(merged, prior) : prior;
    if (fresh.length) {
      const authorOf = latestAuthors(merged);
      for (const field of new Set(fresh.map((f) => f.event.field))) {
        const from = valueOf(prior, field);
        const to = valueOf(after, field);
        if (from !== to) changes.push({ layer: key.layer, unit: key.unit, field, from, to, author: authorOf.get(field) ?? '' });
      }
      units.push({ key, prior, fresh });
    }
    conflicts.push(...conflictDetails(after, merged));
  });
  return { check, mapping, bundleEvents: newEvents + knownEvents, newEvents, knownEvents, changes, conflicts, units };
}

function latestAuthors(events: readonly ReviewEvent[]): Map<Field, string> {
  const out = new Map<Field, string>();
  for (const [field, list] of byField(events)) {
    out.set(field, [...new Set(headsOf(list).map((h) => h.author))].join(', '));
  }
  return out;
}

/** Imports a checked bundle in one transaction; resolutions (for conflicts the plan lists) are written in it too. */
export function applyImport(db: Database.Database, bundle: ReviewBundle, opts: { mapping?: LayerMapping; resolutions?: Resolution[]; reviewer?: string; file?: string } = {}): ImportResult {
  return db.transaction((): ImportResult => {
    const plan = planImport(db, bundle, opts);
    const resolutions = opts.resolutions ?? [];
    for (const [i, r] of resolutions.entries()) {
      if (!plan.conflicts.some((c) => c.layer === r.layer && c.unit === r.unit && c.field === r.field)) {
        throw refuse(opts.file, `resolutions[${i}]`, `There is no conflict on ${r.field} of ${r.layer} unit ${r.unit} in this import; preview the import to see its conflicts.`);
      }
    }
    if (resolutions.length && !opts.reviewer) throw new SkeinError({ code: 'request', where: 'reviewer', message: 'Resolving conflicts is an edit: give your reviewer name (set it once in preferences, or --reviewer NAME).' });
    for (const u of plan.units) {
      for (const f of u.fresh) insertEvent(db, u.key, f.event, 'import', f.sourceId);
      rematerialize(db, u.key, u.prior);
    }
    const fps = studyFingerprints(db, opts.file);
    if (resolutions.length) resolveStored(db, fps, opts.reviewer!, resolutions);
    const resolvedKeys = new Set(resolutions.map((r) => `${r.layer}\u0000${r.unit}\u0000${r.field}`));
    return {
      merged: { newEvents: plan.newEvents, knownEvents: plan.knownEvents, unitsChanged: plan.units.length, fieldsChanged: plan.changes.length, resolved: resolutions.length },
      changes: plan.changes,
      conflicts: plan.conflicts.filter((c) => !resolvedKeys.has(`${c.layer}\u0000${c.unit}\u0000${c.field}`)),
      mapping: plan.mapping,
      fingerprintsMatched: plan.check.same,
    };
  }).immediate();
}
