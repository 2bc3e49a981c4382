/** Pure helpers of the unit page's evidence panel: why a unit ranks where it does, and signed effects. */
import type { RankingReason } from '../../../../core/api/screens/index.ts';
import { count, fixed, unitName } from './format.ts';

/** A signed difference: "+1.02", "−0.31" (a true minus sign), "—" when missing. */
export function signed(x: number | null | undefined, digits = 2): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '—';
  const s = Math.abs(x).toFixed(digits);
  return Number(s) === 0 ? s : x > 0 ? `+${s}` : `−${s}`;
}

// The tolerance of core/score's ranking (rankUnits): figures within it are a tie.
const TIE = 1e-9;

/**
 * One or two sentences on why a unit sits at its place in the study-wide ranking, from the stored scores: the
 * ranking's rule (unflagged first; the lower end of the concept count's 90% interval, most first; then the count
 * itself; then the evidence Σ −log10 q) applied to this unit and its neighbours.
 */
export function rankReason(r: RankingReason): string {
  const place = `Ranked ${count(r.rank + 1)} of ${count(r.total)}`;
  if (r.flags.length) {
    return `${place}: it is ${r.flags.join(' and ')}, and flagged units go after every unflagged one, whatever their concept count.`;
  }
  if (!(r.conceptCount > 0)) {
    return `${place}: no label passes the driver test, so its concept count is 0 and it sits below every unit with a driver.`;
  }
  const parts = [`${place} by the cautious end of its concept count: ${fixed(r.conceptLow, 2)}, the lower bound of its 90% interval ${fixed(r.conceptLow, 2)}–${fixed(r.conceptHigh, 2)} (estimate ${fixed(r.conceptCount, 2)}); most polysemantic first.`];
  const tied = [r.above, r.below].find((n) => n && !n.flagged && Math.abs(n.conceptLow - r.conceptLow) <= TIE);
  if (tied) {
    const name = unitName(tied.layer, tied.unit);
    if (Math.abs(tied.conceptCount - r.conceptCount) > TIE) {
      parts.push(`Tied on that bound with ${name}; the estimate breaks the tie (${fixed(r.conceptCount, 2)} here, ${fixed(tied.conceptCount, 2)} there).`);
    } else {
      parts.push(`Tied on both figures with ${name}; the evidence Σ −log10 q over the drivers breaks the tie (${fixed(r.evidence, 1)} here, ${fixed(tied.evidence, 1)} there).`);
    }
  } else {
    const around: string[] = [];
    if (r.above) around.push(`above it ${unitName(r.above.layer, r.above.unit)} at ${fixed(r.above.conceptLow, 2)}`);
    if (r.below && !r.below.flagged) around.push(`below it ${unitName(r.below.layer, r.below.unit)} at ${fixed(r.below.conceptLow, 2)}`);
    if (around.length) parts.push(`${around.join('; ')}.`.replace(/^a/, 'A').replace(/^b/, 'B'));
  }
  return parts.join(' ');
}

/**
 * A driver list typed by the user: drivers separated by commas, the parts of a compound joined by "&"
 * ("red, blue & square" → [["red"], ["blue", "square"]]). Unknown labels and compounds of more than 3 parts are
 * refused with a message naming them; `labels` is the study's label list.
 */
export function parseDriverList(text: string, labels: readonly string[]): { drivers: string[][] } | { error: string } {
  const known = new Set(labels);
  const drivers = text.split(',').map((d) => d.split('&').map((p) => p.trim()).filter(Boolean)).filter((d) => d.length);
  if (!drivers.length) return { error: 'Type one or more labels, separated by commas; join labels that must be present together with &.' };
  if (drivers.length > 12) return { error: `At most 12 drivers at once; this list has ${drivers.length}.` };
  const long = drivers.find((d) => d.length > 3);
  if (long) return { error: `A compound has at most 3 parts: "${long.join(' & ')}" has ${long.length}.` };
  const unknown = drivers.flat().filter((l) => !known.has(l));
  if (unknown.length) return { error: `No label ${unknown.map((l) => `"${l}"`).join(', ')} in this study.` };
  return { drivers };
}
