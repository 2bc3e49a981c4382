/** Review requests: tags, notes, status, history, undo, bundles, merge, report, preferences (see core/api/review.ts). */
import { z } from 'zod';
import { MAX_TAG_LENGTH, MAX_TAGS_PER_UNIT, tagSchema, noteSchema, statusSchema, reviewerSchema, filterSchema, fieldProblem } from '../../review/vocabulary.ts';
import { filePath, layerName, unitIndex } from './fields.ts';

const field = z.string().min(1).max(MAX_TAG_LENGTH + 4).superRefine((f, c) => {
  const p = fieldProblem(f);
  if (p) c.addIssue({ code: 'custom', message: p });
});
const mapping = z.union([z.literal('by-name'), z.record(layerName, layerName)]);
const resolution = z.strictObject({
  layer: layerName, unit: unitIndex, field,
  keep: z.union([z.literal('mine'), z.literal('theirs'), z.strictObject({ value: z.union([z.string(), z.boolean()]) })]),
});

export const reviewRequests = {
  /** Statuses (ordered, with meanings), tag suggestions and limits, for the editors. */
  'review.vocabulary': z.strictObject({}),
  /** One unit's review in full: annotation, its note rendered, history (newest first), open conflicts. */
  'review.get': z.strictObject({ study: filePath, layer: layerName, unit: unitIndex }),
  /** The study's annotated units as column arrays (for the unit table's review columns and the review queue). */
  'review.list': z.strictObject({ study: filePath, filter: filterSchema.optional() }),
  /** Change tags / note / status of one unit, made on `version`; refused with 'conflict' when it is stale. */
  'review.edit': z.strictObject({
    study: filePath, layer: layerName, unit: unitIndex, version: z.number().int().min(0), reviewer: reviewerSchema,
    changes: z.strictObject({
      /** The complete new tag set (inline editor). */
      tags: z.array(tagSchema).max(MAX_TAGS_PER_UNIT).optional(),
      /** Tags to add / remove (keyboard 't', CLI). Applied after `tags`. */
      addTags: z.array(tagSchema).max(MAX_TAGS_PER_UNIT).optional(),
      removeTags: z.array(tagSchema).max(MAX_TAGS_PER_UNIT).optional(),
      note: noteSchema.optional(),
      status: statusSchema.optional(),
    }),
  }),
  /** Revert this reviewer's newest edit not yet undone in this study. */
  'review.undo': z.strictObject({ study: filePath, reviewer: reviewerSchema }),
  /** Decide open conflicts stored on units (left from an earlier import). */
  'review.resolve': z.strictObject({ study: filePath, reviewer: reviewerSchema, resolutions: z.array(resolution).min(1).max(100_000) }),
  /** Render Markdown exactly as the detail view shows notes (safe HTML fragment). */
  'review.noteHtml': z.strictObject({ note: noteSchema }),
  /** Write a review bundle of all annotated units, or of those the filter selects. */
  'review.export': z.strictObject({ study: filePath, out: filePath, filter: filterSchema.optional(), reviewer: reviewerSchema.optional() }),
  /** What importing a bundle would do, without writing: fingerprint check, mapping proposal, changes, conflicts. */
  'review.preview': z.strictObject({ study: filePath, file: filePath, mapping: mapping.optional() }),
  /** Merge a bundle into the study in one transaction; returns what merged and the conflicts left open. */
  'review.import': z.strictObject({
    study: filePath, file: filePath, mapping: mapping.optional(),
    resolutions: z.array(resolution).max(100_000).optional(),
    /** Signs the resolution edits; required when `resolutions` is not empty. */
    reviewer: reviewerSchema.optional(),
  }),
  /** The meeting report: self-contained HTML, and a CSV of the same units when `csv` is given. {} = every annotated unit. */
  'report.write': z.strictObject({ study: filePath, out: filePath, csv: filePath.optional(), filter: filterSchema, reviewer: reviewerSchema.optional() }),
  /** The reviewer name from the preferences file (null when not set yet). */
  'prefs.get': z.strictObject({}),
  'prefs.set': z.strictObject({ reviewer: reviewerSchema }),
} satisfies Record<string, z.ZodType>;
