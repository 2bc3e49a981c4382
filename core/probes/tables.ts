/** The CSV tables of a probe set: labels (multi-label, CSR), concepts, examples, relatedness. */
import path from 'node:path';
import type { CsvRow, CsvTable } from './csv.ts';
import { probesError } from './fail.ts';
import { resolveInside, type FolderRoot } from './paths.ts';
import type { ConceptRow, ExampleRow } from './types.ts';

/** Labels on fewer probes than this get a warning (common practice, no source: too few positives to score). */
export const FEW_PROBES_PER_LABEL = 5;

export const LABEL_COLUMNS = { required: ['probe', 'label'], optional: [] } as const;
export const CONCEPT_COLUMNS = { required: ['label', 'group'], optional: ['parent', 'description'] } as const;
export const EXAMPLE_COLUMNS = { required: ['probe'], optional: ['id', 'text', 'image'] } as const;
export const RELATEDNESS_COLUMNS = { required: ['label_a', 'label_b', 'similarity'], optional: [] } as const;

/** Parse a probe cell: a whole number in [0, count) (count null: only the form is checked). */
export function parseProbeIndex(table: CsvTable, row: CsvRow, count: number | null): number {
  const cell = row.values.probe ?? '';
  const name = path.basename(table.file);
  if (!/^\d+$/.test(cell) || !Number.isSafeInteger(Number(cell))) {
    throw probesError(table.file, `line ${row.line}`,
      `${name}: probe "${cell}" is not a probe index; probe is the 0-based row number in the inputs (a whole number${count === null ? '' : ` from 0 to ${count - 1}`})`);
  }
  const probe = Number(cell);
  if (count !== null && probe >= count) {
    throw probesError(table.file, `line ${row.line}`,
      `${name}: probe ${probe} does not exist; the probe set has ${count} probes (0 to ${count - 1}) — fix the index or add the rows to the inputs`);
  }
  return probe;
}

function listSome(names: string[], max = 5): string {
  const shown = names.slice(0, max).map((n) => `"${n}"`).join(', ');
  return names.length > max ? `${shown}, … (${names.length - max} more)` : shown;
}

export interface LabelTable {
  labels: string[];
  labelOffsets: Int32Array;
  labelIds: Int32Array;
}

/** Longest label name accepted: names are shown in tables, chips and messages (a limit of our choosing). */
export const MAX_LABEL_LENGTH = 200;

/** A label as messages quote it: at most 60 characters, so a runaway name cannot flood the terminal. */
export function shortLabel(label: string): string {
  return label.length <= 60 ? label : `${label.slice(0, 57)}… (${label.length} characters)`;
}

/** Refuse names no screen or file can show faithfully: control characters (C0, DEL, C1) and over-long names. */
function checkLabelText(file: string, name: string, line: number, label: string): void {
  const control = /[\u0000-\u001f\u007f-\u009f]/.exec(label);
  if (control) {
    const code = control[0].charCodeAt(0).toString(16).toUpperCase().padStart(4, '0');
    throw probesError(file, `line ${line}`,
      `${name}: label "${shortLabel(label.replace(/[\u0000-\u001f\u007f-\u009f]/g, '\u2426'))}" contains the control character U+${code} at position ${control.index + 1}; remove it (labels are plain text on one line)`);
  }
  if (label.length > MAX_LABEL_LENGTH) {
    throw probesError(file, `line ${line}`,
      `${name}: label "${shortLabel(label)}" is longer than ${MAX_LABEL_LENGTH} characters; shorten it (put long descriptions in concepts.csv's description column)`);
  }
}

/** labels.csv → sorted label names and CSR label ids per probe (each probe's ids ascending). */
export function buildLabels(table: CsvTable, count: number, warnings: string[]): LabelTable {
  const name = path.basename(table.file);
  const firstLine = new Map<string, number>();
  const pairs: { probe: number; label: string }[] = [];
  for (const row of table.rows) {
    const probe = parseProbeIndex(table, row, count);
    const label = row.values.label ?? '';
    if (label === '') throw probesError(table.file, `line ${row.line}`, `${name}: the label is empty; give every row a label name or delete the row`);
    checkLabelText(table.file, name, row.line, label);
    const key = `${probe}\u0000${label}`;
    const earlier = firstLine.get(key);
    if (earlier !== undefined) {
      throw probesError(table.file, `line ${row.line}`,
        `${name}: probe ${probe} has label "${shortLabel(label)}" twice (lines ${earlier} and ${row.line}); delete one of the rows`);
    }
    firstLine.set(key, row.line);
    pairs.push({ probe, label });
  }
  if (pairs.length === 0) {
    throw probesError(table.file, undefined, `${name} has no labels; add rows "probe,label" naming what each probe shows`);
  }
  const labels = [...new Set(pairs.map((p) => p.label))].sort();
  const idOf = new Map(labels.map((l, i) => [l, i]));
  const labelOffsets = new Int32Array(count + 1);
  for (const p of pairs) labelOffsets[p.probe + 1]++;
  for (let i = 0; i < count; i++) labelOffsets[i + 1] += labelOffsets[i];
  const labelIds = new Int32Array(pairs.length);
  const cursor = labelOffsets.slice(0, count);
  for (const p of pairs) labelIds[cursor[p.probe]++] = idOf.get(p.label)!;
  for (let i = 0; i < count; i++) labelIds.subarray(labelOffsets[i], labelOffsets[i + 1]).sort();

  const probesPerLabel = new Int32Array(labels.length);
  for (const id of labelIds) probesPerLabel[id]++;
  const rare = labels.filter((_, i) => probesPerLabel[i] < FEW_PROBES_PER_LABEL);
  if (rare.length > 0) {
    warnings.push(`${rare.length} label${rare.length > 1 ? 's occur' : ' occurs'} on fewer than ${FEW_PROBES_PER_LABEL} probes (${listSome(rare)}); scores for them rest on very few probes`);
  }
  const everywhere = labels.filter((_, i) => probesPerLabel[i] === count);
  if (everywhere.length > 0 && count > 1) {
    warnings.push(`${listSome(everywhere)} ${everywhere.length > 1 ? 'are' : 'is'} on every probe, so ${everywhere.length > 1 ? 'they' : 'it'} cannot tell probes apart`);
  }
  let unlabelled = 0;
  for (let i = 0; i < count; i++) if (labelOffsets[i + 1] === labelOffsets[i]) unlabelled++;
  if (unlabelled > 0) warnings.push(`${unlabelled} of ${count} probes have no label in ${name}`);
  return { labels, labelOffsets, labelIds };
}

/** concepts.csv → one row per label; unknown labels are a warning, a label listed twice an error. */
export function buildConcepts(table: CsvTable, labels: readonly string[], warnings: string[]): ConceptRow[] {
  const name = path.basename(table.file);
  const known = new Set(labels);
  const lineOf = new Map<string, number>();
  const out: ConceptRow[] = [];
  for (const row of table.rows) {
    const { label = '', group = '', parent = '', description = '' } = row.values;
    if (label === '') throw probesError(table.file, `line ${row.line}`, `${name}: the label is empty; name a label from the labels file`);
    if (group === '') throw probesError(table.file, `line ${row.line}`, `${name}: label "${label}" has no group; give it a concept group (e.g. "texture")`);
    const earlier = lineOf.get(label);
    if (earlier !== undefined) {
      throw probesError(table.file, `line ${row.line}`, `${name}: label "${label}" is listed twice (lines ${earlier} and ${row.line}); keep one row per label`);
    }
    lineOf.set(label, row.line);
    out.push({ label, group, ...(parent ? { parent } : {}), ...(description ? { description } : {}) });
  }
  const unknown = out.filter((c) => !known.has(c.label)).map((c) => c.label);
  if (unknown.length > 0) warnings.push(`${name} lists ${unknown.length} label${unknown.length > 1 ? 's' : ''} that no probe has (${listSome(unknown)}); they are ignored`);
  const ungrouped = labels.filter((l) => !lineOf.has(l));
  if (ungrouped.length > 0) warnings.push(`${ungrouped.length} label${ungrouped.length > 1 ? 's have' : ' has'} no row in ${name} (${listSome(ungrouped)}); they get no concept group`);
  return out;
}

export interface ExampleTable {
  examples: ExampleRow[];
  /** Line of each example row (parallel to examples). */
  lines: number[];
  /** Resolved image files (parallel to examples; null where a row has no image). */
  imageFiles: (ReturnType<typeof resolveInside> | null)[];
}

/** examples.csv → one row per probe, sorted by probe; image paths checked to stay in the folder and exist. */
export function buildExamples(table: CsvTable, count: number | null, root: FolderRoot): ExampleTable {
  const name = path.basename(table.file);
  if (!table.columns.some((c) => c === 'id' || c === 'text' || c === 'image')) {
    throw probesError(table.file, 'header', `${name} needs at least one of the columns id, text, image besides probe (found: ${table.columns.join(',')})`);
  }
  const lineOf = new Map<number, number>();
  const rows: { example: ExampleRow; line: number; image: ReturnType<typeof resolveInside> | null }[] = [];
  for (const row of table.rows) {
    const probe = parseProbeIndex(table, row, count);
    const earlier = lineOf.get(probe);
    if (earlier !== undefined) {
      throw probesError(table.file, `line ${row.line}`, `${name}: probe ${probe} has two rows (lines ${earlier} and ${row.line}); keep one row per probe`);
    }
    lineOf.set(probe, row.line);
    const { id, text, image } = row.values;
    const resolved = image ? resolveInside(root, image, { file: table.file, where: `line ${row.line}` }, 'image') : null;
    rows.push({
      example: { probe, ...(id ? { id } : {}), ...(text ? { text } : {}), ...(image ? { image } : {}) },
      line: row.line,
      image: resolved,
    });
  }
  rows.sort((a, b) => a.example.probe - b.example.probe);
  return { examples: rows.map((r) => r.example), lines: rows.map((r) => r.line), imageFiles: rows.map((r) => r.image) };
}

/** relatedness.csv → user-given label similarities in [0, 1]; a pair may appear once (in either order). */
export function buildRelatedness(table: CsvTable, labels: readonly string[], warnings: string[]): { a: string; b: string; similarity: number }[] {
  const name = path.basename(table.file);
  const known = new Set(labels);
  const lineOf = new Map<string, number>();
  const out: { a: string; b: string; similarity: number }[] = [];
  const unknown = new Set<string>();
  for (const row of table.rows) {
    const { label_a: a = '', label_b: b = '', similarity: cell = '' } = row.values;
    if (a === '' || b === '') throw probesError(table.file, `line ${row.line}`, `${name}: label_a and label_b must both name a label`);
    const similarity = cell === '' ? NaN : Number(cell);
    if (!(similarity >= 0 && similarity <= 1)) {
      throw probesError(table.file, `line ${row.line}`, `${name}: similarity "${cell}" is not a number from 0 to 1; use 0 for unrelated and 1 for the same concept`);
    }
    const key = a < b ? `${a}\u0000${b}` : `${b}\u0000${a}`;
    const earlier = lineOf.get(key);
    if (earlier !== undefined) {
      throw probesError(table.file, `line ${row.line}`, `${name}: the pair "${a}", "${b}" is given twice (lines ${earlier} and ${row.line}); keep one row per pair`);
    }
    lineOf.set(key, row.line);
    for (const l of [a, b]) if (!known.has(l)) unknown.add(l);
    out.push({ a, b, similarity });
  }
  if (unknown.size > 0) warnings.push(`${name} names ${unknown.size} label${unknown.size > 1 ? 's' : ''} that no probe has (${listSome([...unknown])}); those rows are kept but match nothing`);
  return out;
}
