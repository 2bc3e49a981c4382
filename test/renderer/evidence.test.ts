/** The unit page's "why it ranks here" line and signed effects (app/renderer/src/lib/evidence.ts). */
import { describe, expect, it } from 'vitest';
import { parseDriverList, rankReason, signed } from '../../app/renderer/src/lib/evidence.ts';

const n = (unit: number, conceptCount: number, conceptLow = conceptCount, evidence = 10, flagged = false) => ({ layer: 'fc1', unit, rank: 0, conceptCount, conceptLow, evidence, flagged });

describe('rankReason', () => {
  it('names the cautious figure the ranking uses, the estimate and the neighbours', () => {
    expect(rankReason({ rank: 2, total: 1344, conceptCount: 2.41, conceptLow: 1.62, conceptHigh: 2.8, evidence: 30, flags: [], above: n(7, 2.2, 1.7), below: n(9, 2.6, 1.5) }))
      .toBe('Ranked 3 of 1,344 by the cautious end of its concept count: 1.62, the lower bound of its 90% interval 1.62–2.80 (estimate 2.41); most polysemantic first. Above it fc1 · 7 at 1.70; below it fc1 · 9 at 1.50.');
  });

  it('names the tie-breaker when a neighbour has the same lower bound', () => {
    expect(rankReason({ rank: 4, total: 7, conceptCount: 1.2, conceptLow: 1, conceptHigh: 1.5, evidence: 4.7, flags: [], above: n(6, 1.3, 1), below: null }))
      .toContain('Tied on that bound with fc1 · 6; the estimate breaks the tie (1.20 here, 1.30 there).');
    expect(rankReason({ rank: 4, total: 7, conceptCount: 1, conceptLow: 1, conceptHigh: 1, evidence: 4.7, flags: [], above: n(6, 1, 1, 11), below: null }))
      .toContain('Tied on both figures with fc1 · 6; the evidence Σ −log10 q over the drivers breaks the tie (4.7 here, 11.0 there).');
  });

  it('explains flagged and undriven units by the ranking rule, not by a count', () => {
    expect(rankReason({ rank: 6, total: 7, conceptCount: 0, conceptLow: 0, conceptHigh: 0, evidence: 0, flags: ['dead'], above: n(1, 0), below: null }))
      .toBe('Ranked 7 of 7: it is dead, and flagged units go after every unflagged one, whatever their concept count.');
    expect(rankReason({ rank: 5, total: 7, conceptCount: 0, conceptLow: 0, conceptHigh: 0, evidence: 0, flags: [], above: null, below: null }))
      .toContain('no label passes the driver test');
  });
});

describe('signed', () => {
  it('prints a sign and a true minus, and no sign on zero', () => {
    expect(signed(1.8621, 3)).toBe('+1.862');
    expect(signed(-0.31)).toBe('−0.31');
    expect(signed(-0.0001)).toBe('0.00');
    expect(signed(null)).toBe('—');
  });
});

describe('parseDriverList', () => {
  const labels = ['red', 'blue', 'square', 'top'];
  it('reads commas as separate drivers and & as parts of one', () => {
    expect(parseDriverList('red, blue & square', labels)).toEqual({ drivers: [['red'], ['blue', 'square']] });
    expect(parseDriverList(' top ,, ', labels)).toEqual({ drivers: [['top']] });
  });
  it('refuses an empty list, an unknown label and a compound of four', () => {
    expect(parseDriverList(' , ', labels)).toHaveProperty('error');
    expect(parseDriverList('red, mauve', labels)).toEqual({ error: 'No label "mauve" in this study.' });
    expect(parseDriverList('red & blue & square & top', labels)).toEqual({ error: 'A compound has at most 3 parts: "red & blue & square & top" has 4.' });
  });
});
