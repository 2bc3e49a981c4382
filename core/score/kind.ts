/**
 * The kind of a scored unit, decided once here and sent to the screens (they show it, never recompute it).
 * Dead and dense come first (they are flags of the activity, core/score/layer.ts); otherwise the concept count decides:
 * at least `polysemanticAt` is mixed, above 0 is single, 0 (no driver) is undriven.
 */
export const UNIT_KINDS = ['mixed', 'single', 'undriven', 'dead', 'dense'] as const;
export type UnitKind = (typeof UNIT_KINDS)[number];

export function classifyUnit(u: { dead: boolean; dense: boolean; conceptCount: number }, polysemanticAt: number): UnitKind {
  if (u.dead) return 'dead';
  if (u.dense) return 'dense';
  if (u.conceptCount >= polysemanticAt) return 'mixed';
  if (u.conceptCount > 0) return 'single';
  return 'undriven';
}
