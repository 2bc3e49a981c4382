/**
 * The words of team review: statuses, suggested tags, the fields an edit can touch and the limits on what a
 * reviewer may write. Everything that validates a value (edit request, bundle, resolution) uses these.
 */
import { z } from 'zod';

/** Review statuses, in the order a unit usually moves through them. */
export const STATUSES = ['unreviewed', 'looking', 'confirmed', 'doubtful', 'parked'] as const;
export type Status = (typeof STATUSES)[number];

export const STATUS_MEANING: Record<Status, string> = {
  unreviewed: 'nobody has judged this unit yet',
  looking: 'someone is working through the evidence',
  confirmed: 'the team agrees with the reading of this unit',
  doubtful: 'someone disagrees with the reading or the evidence; talk it through',
  parked: 'set aside: not worth more time for now',
};

/** Offered while typing a tag; any other tag is allowed. */
export const TAG_SUGGESTIONS = ['mixed', 'single-concept', 'label-noise', 'follow-up', 'prune-candidate', 'surprising', 'for-meeting'];

export const DEFAULT_STATUS: Status = 'unreviewed';
export const MAX_TAG_LENGTH = 64;
export const MAX_TAGS_PER_UNIT = 32;
export const MAX_NOTE_LENGTH = 20_000;
export const MAX_REVIEWER_LENGTH = 80;

// Control characters other than tab, newline and carriage return have no place in text a person wrote.
const CONTROL = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f]/;
const LINE_BREAK = /[\r\n\t]/;

export const tagSchema = z.string()
  .min(1, 'a tag cannot be empty')
  .max(MAX_TAG_LENGTH, `a tag has at most ${MAX_TAG_LENGTH} characters`)
  .refine((s) => !CONTROL.test(s) && !LINE_BREAK.test(s), 'a tag is one line of text without control characters')
  .refine((s) => s.trim() === s, 'a tag has no leading or trailing spaces');

export const noteSchema = z.string()
  .max(MAX_NOTE_LENGTH, `a note has at most ${MAX_NOTE_LENGTH} characters`)
  .refine((s) => !CONTROL.test(s), 'a note is plain text (Markdown allowed) without control characters');

export const statusSchema = z.enum(STATUSES, { error: `a status is one of ${STATUSES.join(', ')}` });

export const reviewerSchema = z.string()
  .min(1, 'the reviewer name cannot be empty')
  .max(MAX_REVIEWER_LENGTH, `a reviewer name has at most ${MAX_REVIEWER_LENGTH} characters`)
  .refine((s) => !CONTROL.test(s) && !LINE_BREAK.test(s) && s.trim() === s, 'a reviewer name is one line of text without surrounding spaces');

/** A field of an annotation as history records it: the note, the status, or one tag (present or not). */
export type Field = 'note' | 'status' | `tag:${string}`;
export type FieldValue = string | boolean;

export function tagField(tag: string): Field {
  return `tag:${tag}`;
}

export function isTagField(field: string): field is `tag:${string}` {
  return field.startsWith('tag:');
}

/** Checks a field name; returns an error text or null. */
export function fieldProblem(field: string): string | null {
  if (field === 'note' || field === 'status') return null;
  if (isTagField(field)) {
    const r = tagSchema.safeParse(field.slice(4));
    return r.success ? null : r.error.issues[0].message;
  }
  return `"${field}" is not a review field (note, status or tag:<name>)`;
}

/** Checks a value for a field; returns an error text or null. */
export function valueProblem(field: Field, value: unknown): string | null {
  if (field === 'note') {
    if (typeof value !== 'string') return `the note must be text, got ${typeName(value)}`;
    const r = noteSchema.safeParse(value);
    return r.success ? null : r.error.issues[0].message;
  }
  if (field === 'status') {
    if (typeof value !== 'string') return `the status must be text, got ${typeName(value)}`;
    return (STATUSES as readonly string[]).includes(value) ? null : `"${value.slice(0, 40)}" is not a status (${STATUSES.join(', ')})`;
  }
  return typeof value === 'boolean' ? null : `a tag's value is true (tagged) or false (untagged), got ${typeName(value)}`;
}

export function defaultValue(field: Field): FieldValue {
  return field === 'note' ? '' : field === 'status' ? DEFAULT_STATUS : false;
}

export function typeName(v: unknown): string {
  return v === null ? 'null' : Array.isArray(v) ? 'a list' : typeof v === 'object' ? 'an object' : typeof v;
}

/** How a field is named to a person: "note", "status", "tag follow-up". */
export function fieldLabel(field: Field): string {
  return isTagField(field) ? `tag ${field.slice(4)}` : field;
}

/**
 * Which units an export or a report takes: every criterion given must hold (AND); a list criterion holds when any of
 * its entries does (OR). Here beside the other schemas so the API contract can use it without loading review logic.
 */
export const filterSchema = z.strictObject({
  tags: z.array(tagSchema).min(1).max(64).optional(),
  statuses: z.array(statusSchema).min(1).max(16).optional(),
  layers: z.array(z.string().min(1).max(1024)).min(1).max(10_000).optional(),
  units: z.array(z.strictObject({ layer: z.string().min(1).max(1024), unit: z.number().int().min(0) })).min(1).max(100_000).optional(),
  reviewers: z.array(reviewerSchema).min(1).max(64).optional(),
  /** Only units with unresolved conflicts (true) or without (false). */
  conflicted: z.boolean().optional(),
  /** Case-insensitive text the note must contain. */
  text: z.string().min(1).max(200).optional(),
});

export type ReviewFilter = z.infer<typeof filterSchema>;
