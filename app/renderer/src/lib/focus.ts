/**
 * Every dialog hands the keyboard back to where it came from: `keepFocus()` is called when a dialog is created (before
 * it takes focus) and the function it returns is called when the dialog closes. If the opener is gone by then, the
 * screen's main area gets focus, so keys never fall to a detached element (and to the shortcuts) unnoticed.
 */

/** The part of a DOM element this reads. */
export interface Focusable {
  focus(options?: { preventScroll?: boolean }): void;
  isConnected?: boolean;
}

export function focusBack(opener: Focusable | null, fallback: () => Focusable | null): Focusable | null {
  const target = opener && opener.isConnected !== false ? opener : fallback();
  target?.focus({ preventScroll: true });
  return target;
}

/** Remembers the focused element now; the returned function puts the focus back there (or on the main area). */
export function keepFocus(): () => void {
  const opener = (document.activeElement as HTMLElement | null) ?? null;
  const usable = opener && opener !== document.body ? opener : null;
  return () => {
    // After the dialog's own DOM is gone (the close may come from inside it).
    queueMicrotask(() => focusBack(usable, () => {
      const main = document.querySelector<HTMLElement>('main');
      if (main && !main.hasAttribute('tabindex')) main.tabIndex = -1;
      return main;
    }));
  };
}
