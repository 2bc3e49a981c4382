/**
 * The one "is the user typing" guard (app/renderer/src/lib/keys.ts) and the focus hand-back of dialogs
 * (app/renderer/src/lib/focus.ts). The rule is the app's own (issue 11): no source beyond the HTML element names.
 */
import { describe, expect, it } from 'vitest';
import { isTypingIn, isShortcut } from '../../app/renderer/src/lib/keys.ts';
import { focusBack, type Focusable } from '../../app/renderer/src/lib/focus.ts';

const el = (tagName: string, opts: { editable?: boolean; inDialog?: boolean } = {}) => ({
  tagName, isContentEditable: !!opts.editable, closest: (sel: string) => (sel === '[role="dialog"]' && opts.inDialog ? {} : null),
});
const key = (target: unknown, mods: Partial<Record<'ctrlKey' | 'metaKey' | 'altKey', boolean>> = {}) =>
  ({ target: target as EventTarget, ctrlKey: false, metaKey: false, altKey: false, ...mods });

describe('isTypingIn', () => {
  it('counts text fields, selects and editable elements as typing', () => {
    for (const t of ['INPUT', 'TEXTAREA', 'SELECT', 'input']) expect(isTypingIn(el(t))).toBe(true);
    expect(isTypingIn(el('DIV', { editable: true }))).toBe(true);
  });
  it('counts any element inside an open dialog as the dialog’s, so no shortcut fires behind it', () => {
    expect(isTypingIn(el('BUTTON', { inDialog: true }))).toBe(true);
    expect(isTypingIn(el('DIV', { inDialog: true }))).toBe(true);
  });
  it('leaves buttons, rows and the page to the shortcuts', () => {
    expect(isTypingIn(el('BUTTON'))).toBe(false);
    expect(isTypingIn(el('DIV'))).toBe(false);
    expect(isTypingIn(null)).toBe(false);
  });
});

describe('isShortcut', () => {
  it('fires outside fields with no modifier held, and never with Ctrl, Meta or Alt', () => {
    expect(isShortcut(key(el('DIV')))).toBe(true);
    expect(isShortcut(key(el('DIV'), { ctrlKey: true }))).toBe(false);
    expect(isShortcut(key(el('DIV'), { metaKey: true }))).toBe(false);
    expect(isShortcut(key(el('DIV'), { altKey: true }))).toBe(false);
  });
  it('never fires while a note, a tag box or a dialog has the keyboard', () => {
    expect(isShortcut(key(el('TEXTAREA')))).toBe(false);
    expect(isShortcut(key(el('INPUT')))).toBe(false);
    expect(isShortcut(key(el('BUTTON', { inDialog: true })))).toBe(false);
  });
});

describe('focusBack', () => {
  const spy = (connected = true) => {
    const f = { isConnected: connected, focused: 0, focus() { this.focused += 1; } };
    return f as Focusable & { focused: number };
  };
  it('gives the keyboard back to the element that opened the dialog', () => {
    const opener = spy();
    const main = spy();
    expect(focusBack(opener, () => main)).toBe(opener);
    expect(opener.focused).toBe(1);
    expect(main.focused).toBe(0);
  });
  it('falls back to the main area when the opener has left the page', () => {
    const opener = spy(false);
    const main = spy();
    expect(focusBack(opener, () => main)).toBe(main);
    expect(main.focused).toBe(1);
    expect(focusBack(null, () => main)).toBe(main);
  });
});

import { captionLabels } from '../../app/renderer/src/lib/profile.ts';

describe('captionLabels (the top-probe caption, issue 11: nothing cut off, drivers first)', () => {
  it('puts the unit’s driver labels first, marked, then every other label, leaving none out', () => {
    expect(captionLabels(['amber', 'bar', 'upper-left', 'disc'], ['disc', 'amber'])).toEqual([
      { label: 'disc', driver: true }, { label: 'amber', driver: true }, { label: 'bar', driver: false }, { label: 'upper-left', driver: false },
    ]);
  });
  it('leaves out only the labels the strip shares', () => {
    expect(captionLabels(['amber', 'bar'], ['amber'], ['amber'])).toEqual([{ label: 'bar', driver: false }]);
    expect(captionLabels([], ['amber'])).toEqual([]);
  });
});
