/** The unit kind, classified once in core (core/score/kind.ts) and shown by every screen. */
import { describe, expect, it } from 'vitest';
import { UNIT_KINDS, classifyUnit } from '../../core/score/kind.ts';
import { defaultScoreOptions } from '../../core/score/unit.ts';

describe('classifyUnit', () => {
  const at = defaultScoreOptions.polysemanticAt;

  it('puts the flags first, then compares the concept count with the threshold', () => {
    // The rule as DEVELOPERS.md states it (common practice, no source): dead, dense, then ≥ threshold mixed, > 0 single.
    expect(classifyUnit({ dead: true, dense: false, conceptCount: 0 }, at)).toBe('dead');
    expect(classifyUnit({ dead: false, dense: true, conceptCount: 0 }, at)).toBe('dense');
    expect(classifyUnit({ dead: true, dense: false, conceptCount: 2.6 }, at)).toBe('dead');
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 2.6 }, at)).toBe('mixed');
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 1.0 }, at)).toBe('single');
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 0 }, at)).toBe('undriven');
  });

  it('counts a unit exactly at the threshold as mixed, and just below as single', () => {
    // The default 1.5 is half-way between one and two effective concepts (Leinster–Cobbold diversity, core/score/NOTES.md).
    expect(at).toBe(1.5);
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 1.5 }, at)).toBe('mixed');
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 1.4999 }, at)).toBe('single');
    // A stricter stored option moves the line.
    expect(classifyUnit({ dead: false, dense: false, conceptCount: 1.9 }, 2)).toBe('single');
  });

  it('names five kinds, the order the screens list them in', () => {
    expect(UNIT_KINDS).toEqual(['mixed', 'single', 'undriven', 'dead', 'dense']);
  });
});
