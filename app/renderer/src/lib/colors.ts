/**
 * Label colours: each label keeps one hue on every screen (chips, mixtures, distributions), picked by a hash of its
 * name from a muted palette of our own; a lighter set for the dark theme.
 */
export type Theme = 'light' | 'dark';

// Twelve hues spread round the colour wheel at one calm saturation; consecutive entries are far apart.
const PALETTE: Record<Theme, string[]> = {
  light: ['#3b6ea5', '#c0622f', '#4f8a3a', '#8a4fa0', '#b58a1c', '#2a8a86', '#b04a64', '#5b5fb8', '#7f8a2a', '#2f8fc0', '#a0522d', '#6b7a8f'],
  dark: ['#7fa8d8', '#e89a6a', '#8cc47a', '#c29ad4', '#e0bf5a', '#6cc4bf', '#e08ca0', '#9fa2e8', '#bcc46a', '#7cc3e8', '#d8946c', '#a5b2c4'],
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

/** A label's colour: by its place in the study's label list when known (distinct for up to 12 labels), else by a hash of its name. */
export function labelColor(name: string, theme: Theme, order: readonly string[] = []): string {
  const p = PALETTE[theme];
  const i = order.indexOf(name);
  return p[(i >= 0 ? i : fnv1a(name)) % p.length];
}

/** Colours of the unit kinds (mixed, single, undriven, dead, dense) in charts and badges. */
export const KIND_COLORS: Record<Theme, Record<'mixed' | 'single' | 'undriven' | 'dead' | 'dense', string>> = {
  light: { mixed: '#b5562f', single: '#3f6f8f', undriven: '#b9b4a6', dead: '#6e6a62', dense: '#9c7a2e' },
  dark: { mixed: '#e58a5c', single: '#86b4d4', undriven: '#5a5e66', dead: '#8d8a84', dense: '#d7b767' },
};
