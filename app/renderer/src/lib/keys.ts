/**
 * The one "is the user typing" guard for every keyboard shortcut in the app: a key pressed in a text field, a select,
 * an editable element or anywhere inside an open dialog is the user's text (or the dialog's business), never a shortcut.
 */

/** The part of a DOM element the guard reads (so the rule can be tested without a browser). */
export interface KeyTarget {
  tagName: string;
  isContentEditable?: boolean;
  closest?(selector: string): unknown;
}

const FIELDS = new Set(['INPUT', 'TEXTAREA', 'SELECT']);

/** True when a key aimed at `target` belongs to a field or a dialog, not to the screen's shortcuts. */
export function isTypingIn(target: KeyTarget | null | undefined): boolean {
  if (!target || typeof target.tagName !== 'string') return false;
  if (FIELDS.has(target.tagName.toUpperCase()) || target.isContentEditable) return true;
  return !!target.closest?.('[role="dialog"]');
}

/** The guard for a key event: its target, or the focused element when the event was sent to the window. */
export function isTyping(e: Pick<KeyboardEvent, 'target'>): boolean {
  const t = e.target as KeyTarget | null;
  if (t && typeof t.tagName === 'string' && t.tagName !== 'BODY' && t.tagName !== 'HTML') return isTypingIn(t);
  return typeof document !== 'undefined' && isTypingIn(document.activeElement as KeyTarget | null);
}

/** A shortcut may fire: no modifier held, and the user is not typing. */
export function isShortcut(e: Pick<KeyboardEvent, 'target' | 'ctrlKey' | 'metaKey' | 'altKey'>): boolean {
  return !(e.ctrlKey || e.metaKey || e.altKey) && !isTyping(e);
}
