/** Shares of unit kinds in one layer of 'layers.overview' (they sum to 1 for a layer with units). */
import type { LayerOverviewRow } from '../../../../core/api/contract.ts';

export const STRATA_KINDS = ['mixed', 'single', 'undriven', 'dense', 'dead'] as const;
export type StrataKind = (typeof STRATA_KINDS)[number];

export function kindShares(l: LayerOverviewRow): Record<StrataKind, number> {
  const n = l.units || 1;
  return { mixed: l.polysemantic / n, single: l.single / n, undriven: l.undriven / n, dense: l.dense / n, dead: l.dead / n };
}
