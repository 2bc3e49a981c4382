/**
 * Which units an export or a report takes: every criterion given must hold (AND); a list criterion holds when any of
 * its entries does (OR). `units` is an explicit selection (the rows picked in the unit table); in a report it may name
 * units nobody annotated yet.
 */
import type { ReviewFilter } from './vocabulary.ts';
import type { Annotation } from './store.ts';

/** The unit has something a reviewer wrote: a tag, a note, a status or an open conflict. */
export function hasContent(a: Annotation): boolean {
  return a.tags.length > 0 || a.note !== '' || a.status !== 'unreviewed' || a.conflicts.length > 0;
}

export function selectionKey(layer: string, unit: number): string {
  return `${layer}\u0000${unit}`;
}

/** A test for the filter, with its unit selection indexed once (a selection may name 10^5 units). */
export function filterPredicate(f: ReviewFilter | null | undefined): (a: Annotation) => boolean {
  if (!f) return () => true;
  const selected = f.units ? new Set(f.units.map((u) => selectionKey(u.layer, u.unit))) : null;
  const text = f.text?.toLowerCase();
  return (a) => {
    if (f.tags && !f.tags.some((t) => a.tags.includes(t))) return false;
    if (f.statuses && !f.statuses.includes(a.status)) return false;
    if (f.layers && !f.layers.includes(a.layer)) return false;
    if (selected && !selected.has(selectionKey(a.layer, a.unit))) return false;
    if (f.reviewers && !(a.reviewer !== null && f.reviewers.includes(a.reviewer))) return false;
    if (f.conflicted !== undefined && (a.conflicts.length > 0) !== f.conflicted) return false;
    if (text && !a.note.toLowerCase().includes(text)) return false;
    return true;
  };
}

/** A filter in words, for report headers and CLI messages. */
export function describeFilter(f: ReviewFilter | null | undefined): string {
  if (!f || Object.keys(f).length === 0) return 'all annotated units';
  const parts: string[] = [];
  if (f.tags) parts.push(`tagged ${f.tags.join(' or ')}`);
  if (f.statuses) parts.push(`status ${f.statuses.join(' or ')}`);
  if (f.layers) parts.push(`in ${f.layers.join(', ')}`);
  if (f.units) parts.push(`${f.units.length} selected unit${f.units.length === 1 ? '' : 's'}`);
  if (f.reviewers) parts.push(`last changed by ${f.reviewers.join(' or ')}`);
  if (f.conflicted !== undefined) parts.push(f.conflicted ? 'with open conflicts' : 'without open conflicts');
  if (f.text) parts.push(`note mentions "${f.text}"`);
  return parts.join(', ');
}
