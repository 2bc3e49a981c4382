/**
 * Label colours. Within a study every label gets its own colour (up to the palette's 16), the same on every screen.
 * A label that names a colour ("scarlet", "teal", "dark-red") is drawn in that colour; the others take, in the study's
 * label order, the first palette colour clearly apart (CIE76 ΔE ≥ MIN_DELTA_E) from every colour already given.
 * A lighter set for the dark theme.
 */
export type Theme = 'light' | 'dark';

// Sixteen calm colours of our own, ordered so that neighbours are far apart.
const PALETTE: Record<Theme, string[]> = {
  light: ['#3b6ea5', '#c0622f', '#4f8a3a', '#8a4fa0', '#b58a1c', '#2a8a86', '#b04a64', '#6b7a8f', '#7f8a2a', '#2f8fc0', '#6a4a2a', '#d04f9a', '#5b5fb8', '#8fa84a', '#3f3f46', '#a0522d'],
  dark: ['#7fa8d8', '#e89a6a', '#8cc47a', '#c29ad4', '#e0bf5a', '#6cc4bf', '#e08ca0', '#a5b2c4', '#bcc46a', '#7cc3e8', '#b8936c', '#f08ad0', '#9fa2e8', '#d4e88a', '#e6e6ea', '#d8746c'],
};

/** Colours that label names use, as drawn in each theme (a name may use any of these words, e.g. "dark-red"). */
const NAMED: Record<string, Record<Theme, string>> = {
  red: { light: '#c4302b', dark: '#f0675c' }, scarlet: { light: '#d0342a', dark: '#f4705e' }, crimson: { light: '#a8203c', dark: '#e8607a' },
  orange: { light: '#d9731c', dark: '#f5a050' }, amber: { light: '#d9990f', dark: '#f2bf3c' }, yellow: { light: '#c7a600', dark: '#ecd84a' },
  gold: { light: '#b8901a', dark: '#e4c25a' }, green: { light: '#3c8a34', dark: '#74c866' }, lime: { light: '#7aa619', dark: '#b4e05a' },
  olive: { light: '#76802a', dark: '#b8c066' }, teal: { light: '#13857f', dark: '#4fc4bb' }, cyan: { light: '#1697b3', dark: '#5fd3ea' },
  turquoise: { light: '#1fa59a', dark: '#62dccd' }, blue: { light: '#2d5fb8', dark: '#6f9cf0' }, navy: { light: '#253f7e', dark: '#7d93d6' },
  azure: { light: '#2a86d6', dark: '#75b8f2' }, indigo: { light: '#4a33b0', dark: '#9688f2' }, violet: { light: '#7a49c2', dark: '#b894f0' },
  purple: { light: '#7d3a98', dark: '#c68be2' }, magenta: { light: '#b82d92', dark: '#ec7ccf' }, pink: { light: '#d65a8c', dark: '#f59bbe' },
  rose: { light: '#c24468', dark: '#f28aa6' }, brown: { light: '#7a4a26', dark: '#c49066' }, tan: { light: '#b08a5a', dark: '#d8b88a' },
  grey: { light: '#7a7a7a', dark: '#a8a8a8' }, gray: { light: '#7a7a7a', dark: '#a8a8a8' }, silver: { light: '#9a9ea6', dark: '#c8ccd4' },
  black: { light: '#222226', dark: '#5a5a62' }, white: { light: '#b9b9b4', dark: '#f2f2ee' },
};

/** Two colours of a view this far apart (CIE76 ΔE, in L*a*b*) are told apart at a glance (common practice, no source). */
export const MIN_DELTA_E = 20;

/** The colour a label's name says, or null ("dark-red" → red; "upper-left" → null). */
export function namedColor(label: string, theme: Theme): string | null {
  for (const word of label.toLowerCase().split(/[^a-z]+/)) if (NAMED[word]) return NAMED[word][theme];
  return null;
}

/** sRGB hex → CIE L*a*b* (D65), by the sRGB transfer function (IEC 61966-2-1) and the CIE 1976 L*a*b* formulas. */
export function hexToLab(hex: string): [number, number, number] {
  const n = Number.parseInt(hex.slice(1), 16);
  const lin = [(n >> 16) & 255, (n >> 8) & 255, n & 255].map((c) => { const v = c / 255; return v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4; });
  const [r, g, b] = lin;
  const x = (0.4124 * r + 0.3576 * g + 0.1805 * b) / 0.95047;
  const y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
  const z = (0.0193 * r + 0.1192 * g + 0.9505 * b) / 1.08883;
  const f = (t: number) => (t > (6 / 29) ** 3 ? Math.cbrt(t) : t / (3 * (6 / 29) ** 2) + 4 / 29);
  return [116 * f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))];
}

/** CIE76 colour difference: the Euclidean distance in L*a*b*. */
export function deltaE(a: string, b: string): number {
  const [l1, a1, b1] = hexToLab(a);
  const [l2, a2, b2] = hexToLab(b);
  return Math.hypot(l1 - l2, a1 - a2, b1 - b2);
}

/** Every label of a study with its colour: distinct within the study, and true to a colour its name says. */
export function assignLabelColors(order: readonly string[], theme: Theme): Map<string, string> {
  const out = new Map<string, string>();
  const used: string[] = [];
  for (const l of order) {
    const c = namedColor(l, theme);
    if (c && !out.has(l)) { out.set(l, c); used.push(c); }
  }
  for (const l of order) {
    if (out.has(l)) continue;
    // The first colour clearly apart from all given so far; past that (more labels than colours), the farthest one.
    const spread = (p: string) => Math.min(Infinity, ...used.map((u) => deltaE(p, u)));
    const candidates = PALETTE[theme].filter((p) => !used.includes(p));
    const pool = candidates.length ? candidates : PALETTE[theme];
    const c = pool.find((p) => spread(p) >= MIN_DELTA_E) ?? pool.reduce((best, p) => (spread(p) > spread(best) ? p : best));
    out.set(l, c);
    used.push(c);
  }
  return out;
}

/** FNV-1a 32-bit hash (Fowler, Noll, Vo; public-domain reference), enough to spread label names over the palette. */
export function fnv1a(text: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h >>> 0;
}

let cached: { order: readonly string[]; theme: Theme; colors: Map<string, string> } | null = null;

/** A label's colour: from the study's label list when known (see assignLabelColors), else its named colour or a hash. */
export function labelColor(name: string, theme: Theme, order: readonly string[] = []): string {
  if (!cached || cached.order !== order || cached.theme !== theme) cached = { order, theme, colors: assignLabelColors(order, theme) };
  return cached.colors.get(name) ?? namedColor(name, theme) ?? PALETTE[theme][fnv1a(name) % PALETTE[theme].length];
}

/** Colours of the unit kinds (mixed, single, undriven, dead, dense) in charts and badges. */
export const KIND_COLORS: Record<Theme, Record<'mixed' | 'single' | 'undriven' | 'dead' | 'dense', string>> = {
  light: { mixed: '#b5562f', single: '#3f6f8f', undriven: '#b9b4a6', dead: '#6e6a62', dense: '#9c7a2e' },
  dark: { mixed: '#e58a5c', single: '#86b4d4', undriven: '#5a5e66', dead: '#8d8a84', dense: '#d7b767' },
};
