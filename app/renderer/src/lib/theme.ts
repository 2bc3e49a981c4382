/** Light or dark: the user's choice (kept in local storage) or, until they choose, the system's. */
import type { Theme } from './colors.ts';

const KEY = 'skein.theme';

export function storedTheme(storage: Pick<Storage, 'getItem'>): Theme | null {
  const v = storage.getItem(KEY);
  return v === 'light' || v === 'dark' ? v : null;
}

export function initialTheme(storage: Pick<Storage, 'getItem'>, prefersDark: boolean): Theme {
  return storedTheme(storage) ?? (prefersDark ? 'dark' : 'light');
}

export function saveTheme(storage: Pick<Storage, 'setItem'>, theme: Theme): void {
  storage.setItem(KEY, theme);
}

/** A CSS custom property of the document, for the charts (plotly takes colours, not variables). */
export function cssVar(name: string): string {
  return getComputedStyle(document.documentElement).getPropertyValue(name).trim();
}
