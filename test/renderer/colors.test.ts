/**
 * Label colours (app/renderer/src/lib/colors.ts): distinct within a study, and true to a colour a label names.
 * Lab check values: sRGB red #ff0000 = L*a*b* (53.24, 80.09, 67.20), white = (100, 0, 0), the standard sRGB → CIELAB
 * conversion under D65 as tabulated by Bruce Lindbloom's colour calculator (from memory).
 */
import { describe, expect, it } from 'vitest';
import { assignLabelColors, deltaE, hexToLab, labelColor, MIN_DELTA_E, namedColor } from '../../app/renderer/src/lib/colors.ts';
import { FAMILIES } from '../../sample-data/lib/scene.ts';

const demoLabels = FAMILIES.flatMap((f) => f.concepts.map((c) => c.label));
/** Hue angle h_ab in degrees (CIE 1976). */
const hue = (hex: string) => { const [, a, b] = hexToLab(hex); return ((Math.atan2(b, a) * 180) / Math.PI + 360) % 360; };

describe('hexToLab', () => {
  it('matches the tabulated values of sRGB red and white', () => {
    const [l, a, b] = hexToLab('#ff0000');
    expect(l).toBeCloseTo(53.24, 1);
    expect(a).toBeCloseTo(80.09, 0);
    expect(b).toBeCloseTo(67.2, 0);
    const [lw, aw, bw] = hexToLab('#ffffff');
    expect(lw).toBeCloseTo(100, 2);
    expect(Math.abs(aw) + Math.abs(bw)).toBeLessThan(0.05);
  });
});

describe('assignLabelColors on the demo’s twelve labels', () => {
  for (const theme of ['light', 'dark'] as const) {
    it(`gives every label its own colour, at least ΔE ${MIN_DELTA_E} from every other (${theme})`, () => {
      const m = assignLabelColors(demoLabels, theme);
      expect(m.size).toBe(12);
      const colours = [...m.values()];
      for (let i = 0; i < colours.length; i++) for (let j = i + 1; j < colours.length; j++) {
        expect(deltaE(colours[i], colours[j]), `${demoLabels[i]} / ${demoLabels[j]}`).toBeGreaterThanOrEqual(MIN_DELTA_E);
      }
    });
    it(`draws scarlet red, amber orange-yellow, teal blue-green and indigo blue-violet (${theme})`, () => {
      const m = assignLabelColors(demoLabels, theme);
      // CIELAB hue angles of the named hues (ranges wide enough for any honest rendering; common practice, no source).
      expect(hue(m.get('scarlet')!)).toBeGreaterThan(20); expect(hue(m.get('scarlet')!)).toBeLessThan(50);
      expect(hue(m.get('amber')!)).toBeGreaterThan(55); expect(hue(m.get('amber')!)).toBeLessThan(90);
      expect(hue(m.get('teal')!)).toBeGreaterThan(170); expect(hue(m.get('teal')!)).toBeLessThan(230);
      expect(hue(m.get('indigo')!)).toBeGreaterThan(270); expect(hue(m.get('indigo')!)).toBeLessThan(320);
    });
  }
});

describe('namedColor and labelColor', () => {
  it('reads a colour word anywhere in a label, and nothing from other words', () => {
    expect(namedColor('dark-red', 'light')).toBe(namedColor('red', 'light'));
    expect(namedColor('upper-left', 'light')).toBeNull();
    expect(namedColor('Teal', 'dark')).toBe(namedColor('teal', 'dark'));
  });
  it('is the same colour on every screen for one study, and a named colour outside a study', () => {
    expect(labelColor('ring', 'light', demoLabels)).toBe(assignLabelColors(demoLabels, 'light').get('ring'));
    expect(labelColor('scarlet', 'dark')).toBe(namedColor('scarlet', 'dark'));
  });
  it('keeps colours apart when a study has more labels than the palette, as far as the palette allows', () => {
    const many = Array.from({ length: 20 }, (_, i) => `label-${i}`);
    const m = assignLabelColors(many, 'light');
    expect(new Set([...m.values()].slice(0, 16)).size).toBe(16);
  });
});
