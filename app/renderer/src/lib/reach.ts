/** Per-label counts over the unit table: how many units each label drives, and of how many it is the only driver. */
import type { UnitTable } from './table.ts';

export function labelReachCounts(t: UnitTable): { drives: Int32Array; only: Int32Array } {
  const drives = new Int32Array(t.labels.length);
  const only = new Int32Array(t.labels.length);
  for (let i = 0; i < t.count; i++) {
    const d0 = t.driverOffsets[i];
    const d1 = t.driverOffsets[i + 1];
    for (let k = d0; k < d1; k++) drives[t.driverLabel[k]]++;
    if (d1 - d0 === 1) only[t.driverLabel[d0]]++;
  }
  return { drives, only };
}
