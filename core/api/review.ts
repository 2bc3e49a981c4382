/**
 * Review requests: tags, notes, status, history, undo, bundles, merge, report, preferences. Composed into the one
 * API by createApi; validated like every other request.
 *
 * For the screens (inline editing in the unit table and detail, the review-queue filter, the merge screen):
 * - Load: 'prefs.get' once (the reviewer name; ask for it with 'prefs.set' when null) and 'review.vocabulary' once
 *   (statuses with their meanings, tag suggestions, limits). 'review.list' gives the table's review columns for the
 *   study (filterable, column arrays); 'review.get' gives one unit in full: annotation, rendered note, history, and
 *   open conflicts.
 * - Edit: 'review.edit' with the `version` from the annotation you show. On success it returns the new annotation
 *   (keep its version for the next edit). When someone else changed the unit first it fails with code 'conflict';
 *   the error's JSON carries `current` (ReviewConflictInfo): show it, let the user redo the edit on it. Nothing is
 *   ever overwritten silently. The edit is durable (committed with synchronous=FULL) when the response arrives.
 * - Undo: 'review.undo' reverts this reviewer's newest edit in the study (repeat to go further back), as new
 *   history; refused with 'conflict' when someone changed those fields since.
 * - Live Markdown preview while typing a note: 'review.noteHtml' (the same safe renderer the detail view gets).
 * - Merge screen: 'review.preview' (fingerprint check, proposed layer mapping, what would change, the conflicts),
 *   then 'review.import' with the mapping the user confirmed and one resolution per conflict they decided
 *   (keep 'mine' | 'theirs' | {value}). Conflicts left undecided stay listed on the units ('review.list' conflicts,
 *   filter {conflicted: true}) and can be decided later with 'review.resolve'.
 * - Export a bundle: 'review.export'; the meeting report: 'report.write'.
 */
import path from 'node:path';
import type { z } from 'zod';
import { SkeinError } from '../errors.ts';
import { openStudyDb, withStudyDb } from '../store/study.ts';
import { readBinding } from '../store/binding.ts';
import {
  STATUSES, STATUS_MEANING, TAG_SUGGESTIONS, MAX_NOTE_LENGTH, MAX_TAGS_PER_UNIT, MAX_TAG_LENGTH, MAX_REVIEWER_LENGTH, MAX_BUNDLE_BYTES,
  unitKey, readAnnotation, eventsOfUnit, conflictDetails, listAnnotations, otherFingerprints, studyFingerprints, editUnit, undoLast,
  resolveStored, filterPredicate, readBundleFile, buildBundle, planImport, applyImport, checkFingerprints, renderNote,
  readPreferences, saveReviewer, gatherReport, renderReportHtml, renderReportCsv,
  type Annotation, type ConflictDetail, type Field, type Resolution, type Status, type StoredEvent, type ReviewFilter,
  type FingerprintCheck, type FieldChange, type ImportResult, type UndoResult, type Preferences,
} from '../review/index.ts';
import { defaultDataDir } from './files.ts';
import { writeFileDurably } from '../fs/index.ts';
import { checkPath, type ApiContext } from './context.ts';
import type { reviewRequests } from './requests/review.ts';

type Req<K extends keyof typeof reviewRequests> = z.infer<(typeof reviewRequests)[K]>;

export interface ReviewVocabulary {
  statuses: { name: Status; meaning: string }[];
  tagSuggestions: string[];
  limits: { tagLength: number; tagsPerUnit: number; noteLength: number; reviewerLength: number; bundleBytes: number };
}

export interface UnitReview {
  fingerprints: { model: string; probes: string };
  annotation: Annotation;
  /** The note as a safe HTML fragment (Markdown rendered; raw HTML shown as text, images never loaded). */
  noteHtml: string;
  /** Newest first. */
  history: StoredEvent[];
  conflicts: ConflictDetail[];
}

/**
 * Annotated units as column arrays, entry i describing one unit (ordered by layer, then unit). `layer[i]` indexes
 * `layers`. `note` is the note's first 200 characters (the full note: 'review.get').
 */
export interface ReviewList {
  fingerprints: { model: string; probes: string };
  count: number;
  layers: string[];
  layer: number[];
  unit: number[];
  status: Status[];
  tags: string[][];
  note: string[];
  noteLength: number[];
  reviewer: (string | null)[];
  updatedAt: (string | null)[];
  version: number[];
  conflicts: Field[][];
  /** Over the listed units, most used first (the tag filter's choices). */
  tagCounts: { tag: string; count: number }[];
  statusCounts: Record<Status, number>;
  /** Annotations this study keeps for earlier model / probe-set fingerprints (not listed above). */
  elsewhere: { modelFp: string; probesFp: string; units: number }[];
}

export interface ReviewPreview {
  check: FingerprintCheck;
  /** Set when the import would be refused as it stands (fingerprint mismatch without mapping, unknown layer …). */
  refused: string | null;
  mapping: Record<string, string> | null;
  bundle: { exportedBy: string | null; exportedAt: string; units: number; events: number };
  newEvents: number;
  knownEvents: number;
  changes: FieldChange[];
  conflicts: ConflictDetail[];
}

export interface ExportBundleResult { file: string; units: number; events: number; bytes: number }
export interface ReportResult { file: string; csv: string | null; units: number; bytes: number }

/** The JSON of a 'conflict' error from 'review.edit' / 'review.undo': the unit as it is now. */
export type ReviewConflictInfo = import('../errors.ts').ErrorInfo & { code: 'conflict'; current: Annotation };

export type { Annotation, ConflictDetail, ConflictSide, Field, FieldValue, Status, StoredEvent, ReviewFilter, FingerprintCheck, FieldChange, ImportResult, UndoResult, Preferences, Resolution } from '../review/index.ts';

export function createReviewApi(ctx: ApiContext) {
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);
  const dataDir = () => ctx.dataDir ?? defaultDataDir();
  // Checked here too (dispatch checks them first) so a handler called directly keeps browser mode's rule.
  const checkRoots = (fields: Record<string, string | undefined>) => {
    for (const [name, p] of Object.entries(fields)) if (p !== undefined) checkPath(p, name, ctx.allowedRoots);
  };
  const signer = (given: string | undefined) => given ?? readPreferences(dataDir()).reviewer;

  return {
    'review.vocabulary': async (_r: Req<'review.vocabulary'>): Promise<ReviewVocabulary> => ({
      statuses: STATUSES.map((name) => ({ name, meaning: STATUS_MEANING[name] })),
      tagSuggestions: [...TAG_SUGGESTIONS],
      limits: { tagLength: MAX_TAG_LENGTH, tagsPerUnit: MAX_TAGS_PER_UNIT, noteLength: MAX_NOTE_LENGTH, reviewerLength: MAX_REVIEWER_LENGTH, bundleBytes: MAX_BUNDLE_BYTES },
    }),

    'review.get': async (r: Req<'review.get'>): Promise<UnitReview> => withStudy(r.study, (db) => {
      const key = unitKey(db, r.layer, r.unit, r.study);
      const annotation = readAnnotation(db, key);
      const events = eventsOfUnit(db, key);
      return {
        fingerprints: { model: key.modelFp, probes: key.probesFp },
        annotation, noteHtml: renderNote(annotation.note), history: [...events].reverse(), conflicts: conflictDetails(annotation, events),
      };
    }),

    'review.list': async (r: Req<'review.list'>): Promise<ReviewList> => withStudy(r.study, (db) => {
      const fps = studyFingerprints(db, r.study);
      const rows = listAnnotations(db, fps).filter(filterPredicate(r.filter));
      const layers = [...new Set(rows.map((a) => a.layer))];
      const layerIndex = new Map(layers.map((l, i) => [l, i]));
      const tagCounts = new Map<string, number>();
      const statusCounts = Object.fromEntries(STATUSES.map((s) => [s, 0])) as Record<Status, number>;
      for (const a of rows) {
        for (const t of a.tags) tagCounts.set(t, (tagCounts.get(t) ?? 0) + 1);
        statusCounts[a.status]++;
      }
      return {
        fingerprints: { model: fps.modelFp, probes: fps.probesFp }, count: rows.length, layers,
        layer: rows.map((a) => layerIndex.get(a.layer)!), unit: rows.map((a) => a.unit), status: rows.map((a) => a.status),
        tags: rows.map((a) => a.tags), note: rows.map((a) => a.note.slice(0, 200)), noteLength: rows.map((a) => a.note.length),
        reviewer: rows.map((a) => a.reviewer), updatedAt: rows.map((a) => a.updatedAt), version: rows.map((a) => a.version),
        conflicts: rows.map((a) => a.conflicts),
        tagCounts: [...tagCounts].map(([tag, count]) => ({ tag, count })).sort((a, b) => b.count - a.count || (a.tag < b.tag ? -1 : 1)),
        statusCounts, elsewhere: otherFingerprints(db, fps),
      };
    }),

    'review.edit': async (r: Req<'review.edit'>): Promise<Annotation> => withStudy(r.study, (db) =>
      editUnit(db, unitKey(db, r.layer, r.unit, r.study), r.version, r.reviewer, r.changes)),

    'review.undo': async (r: Req<'review.undo'>): Promise<UndoResult> => withStudy(r.study, (db) =>
      undoLast(db, studyFingerprints(db, r.study), r.reviewer)),

    'review.resolve': async (r: Req<'review.resolve'>): Promise<{ annotations: Annotation[] }> => withStudy(r.study, (db) => {
      const resolutions = r.resolutions.map((x) => ({ ...x, layer: unitKey(db, x.layer, x.unit, r.study).layer })) as Resolution[];
      return { annotations: resolveStored(db, studyFingerprints(db, r.study), r.reviewer, resolutions) };
    }),

    'review.noteHtml': async (r: Req<'review.noteHtml'>): Promise<{ html: string }> => ({ html: renderNote(r.note) }),

    'review.export': async (r: Req<'review.export'>): Promise<ExportBundleResult> => withStudy(r.study, (db) => {
      const fps = studyFingerprints(db, r.study);
      const binding = readBinding(db)!;
      const chosen = listAnnotations(db, fps).filter(filterPredicate(r.filter));
      const bundle = buildBundle(db, fps, binding.probesName, chosen, signer(r.reviewer), (r.filter ?? null) as ReviewFilter | null);
      const text = JSON.stringify(bundle, null, 1) + '\n';
      if (Buffer.byteLength(text) > MAX_BUNDLE_BYTES) {
        throw new SkeinError({ code: 'review', file: r.out, message: `This bundle would be larger than ${MAX_BUNDLE_BYTES / 1048576} MB, more than a colleague's Skein accepts. Export with a filter (by layer, tag or status) in parts.` });
      }
      writeFileDurably(r.out, text);
      return { file: path.resolve(r.out), units: bundle.units.length, events: bundle.units.reduce((n, u) => n + u.events.length, 0), bytes: Buffer.byteLength(text) };
    }),

    'review.preview': async (r: Req<'review.preview'>): Promise<ReviewPreview> => {
      checkRoots({ file: r.file });
      const bundle = readBundleFile(r.file);
      return withStudy(r.study, (db) => {
        const info = { exportedBy: bundle.exportedBy, exportedAt: bundle.exportedAt, units: bundle.units.length, events: bundle.units.reduce((n, u) => n + u.events.length, 0) };
        const check = checkFingerprints(db, bundle);
        try {
          const plan = planImport(db, bundle, { mapping: r.mapping, file: path.resolve(r.file) });
          return { check, refused: null, mapping: plan.mapping, bundle: info, newEvents: plan.newEvents, knownEvents: plan.knownEvents, changes: plan.changes, conflicts: plan.conflicts };
        } catch (e) {
          if (!(e instanceof SkeinError) || e.code !== 'review') throw e;
          return { check, refused: e.message, mapping: null, bundle: info, newEvents: 0, knownEvents: 0, changes: [], conflicts: [] };
        }
      });
    },

    'review.import': async (r: Req<'review.import'>): Promise<ImportResult> => {
      checkRoots({ file: r.file });
      // Everything in the file is checked before the study is opened for writing.
      const bundle = readBundleFile(r.file);
      return withStudy(r.study, (db) => {
        const resolutions = (r.resolutions ?? []) as Resolution[];
        return applyImport(db, bundle, { mapping: r.mapping, resolutions, reviewer: resolutions.length ? signer(r.reviewer) ?? undefined : r.reviewer, file: path.resolve(r.file) });
      });
    },

    'report.write': async (r: Req<'report.write'>): Promise<ReportResult> => {
      checkRoots({ csv: r.csv });
      return withStudy(r.study, (db) => {
        const data = gatherReport(db, r.study, r.filter as ReviewFilter, signer(r.reviewer));
        const html = renderReportHtml(data);
        writeFileDurably(r.out, html);
        if (r.csv) writeFileDurably(r.csv, renderReportCsv(data));
        return { file: path.resolve(r.out), csv: r.csv ? path.resolve(r.csv) : null, units: data.units.length, bytes: Buffer.byteLength(html) };
      });
    },

    'prefs.get': async (_r: Req<'prefs.get'>): Promise<Preferences> => readPreferences(dataDir()),
    'prefs.set': async (r: Req<'prefs.set'>): Promise<Preferences> => saveReviewer(dataDir(), r.reviewer),
  };
}
