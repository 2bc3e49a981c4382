/**
 * Label colours: each label keeps one hue on every screen (chips, mixtures, distributions), picked by a hash of its
 * name from a muted palette of our own; a lighter set for the dark theme.
 */
export type Theme = 'light' | 'dark';

const PALETTE: Record<Theme, string[]> = {
  light: ['#3f6f8f', '#a0603c', '#5b7f3a', '#7a4f86', '#9c7a2e', '#2f7f77', '#8c4656', '#55608a', '#6d7a2a', '#3f86a8', '#a05a82', '#5f6e5c'],
  dark: ['#86b4d4', '#e09a72', '#9cc47a', '#bb98c8', '#d7b767', '#74c2b8', '#d48a9a', '#9aa6d6', '#b5c06a', '#82c0de', '#dc9cc0', '#a7b6a4'],
};

/** FNV-1a 32-bit hash (Fowler, Noll, Vo; public-domain reference), enough to spread label names over the palette. */
export function fnv1a(text: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h >>> 0;
}

export function labelColor(name: string, theme: Theme): string {
  const p = PALETTE[theme];
  return p[fnv1a(name) % p.length];
}

/** Colours of the unit kinds (mixed, single, undriven, dead, dense) in charts and badges. */
export const KIND_COLORS: Record<Theme, Record<'mixed' | 'single' | 'undriven' | 'dead' | 'dense', string>> = {
  light: { mixed: '#b5562f', single: '#3f6f8f', undriven: '#b9b4a6', dead: '#6e6a62', dense: '#9c7a2e' },
  dark: { mixed: '#e58a5c', single: '#86b4d4', undriven: '#5a5e66', dead: '#8d8a84', dense: '#d7b767' },
};
