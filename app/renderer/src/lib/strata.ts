/** Shares of unit kinds in one layer of 'layers.strata' (they sum to 1 for a layer with units). */
import type { LayerStrataRow } from '../../../../core/api/contract.ts';

export const STRATA_KINDS = ['mixed', 'single', 'undriven', 'dense', 'dead'] as const;
export type StrataKind = (typeof STRATA_KINDS)[number];

export function kindShares(l: LayerStrataRow): Record<StrataKind, number> {
  const n = l.units || 1;
  return { mixed: l.mixed / n, single: l.single / n, undriven: l.undriven / n, dense: l.dense / n, dead: l.dead / n };
}
