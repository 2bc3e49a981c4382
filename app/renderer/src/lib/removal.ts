/** Plain logic behind the removal-cost panel and the layer costs view (tested in test/renderer/removal.test.ts). */
import type { UnitCost, LabelCost } from '../../../../core/api/contract.ts';

/** What the cost is measured as, in words a reader can check against the numbers. */
export const METRIC_WORDS: Record<string, { short: string; long: string }> = {
  'target-drop': { short: 'drop of the target output', long: 'how much the output for each probe’s target classes (targets.csv) falls' },
  'squared-error': { short: 'rise of the squared error', long: 'how much the squared error against targets.csv rises' },
  kl: { short: 'KL divergence of the outputs', long: 'the KL divergence between the output distributions before and after' },
  l2: { short: 'change of the outputs (L2)', long: 'the length of the change of the output vector (no targets.csv in the probe set)' },
};

export function metricWords(metric: string): { short: string; long: string } {
  return METRIC_WORDS[metric] ?? { short: metric, long: metric };
}

/** Labels for the chart: hurt first by cost, then the rest by cost; at most `max`, keeping every hurt label. */
export function chartLabels(cost: UnitCost, max = 14): LabelCost[] {
  const rows = cost.labels.filter((l) => l.n > 0);
  const hurt = rows.filter((l) => l.hurt).sort((a, b) => b.mean - a.mean);
  const rest = rows.filter((l) => !l.hurt).sort((a, b) => b.mean - a.mean);
  return [...hurt, ...rest.slice(0, Math.max(0, max - hurt.length))];
}

/** Horizontal bars of mean cost per label with their bootstrap intervals, hurt labels in their own colour. */
export function costTraces(cost: UnitCost, color: (label: string) => string, quiet: string, max = 14): Record<string, unknown>[] {
  const rows = chartLabels(cost, max).reverse();
  const lo = rows.map((l) => (l.interval ? l.mean - l.interval[0] : 0));
  const hi = rows.map((l) => (l.interval ? l.interval[1] - l.mean : 0));
  return [{
    type: 'bar', orientation: 'h',
    y: rows.map((l) => l.label), x: rows.map((l) => l.mean),
    marker: { color: rows.map((l) => (l.hurt ? color(l.label) : quiet)) },
    error_x: { type: 'data', symmetric: false, array: hi, arrayminus: lo, thickness: 1, width: 3 },
    customdata: rows.map((l) => [l.meanOthers, l.q, l.n]),
    hovertemplate: '%{y}: %{x:.4f} (other probes %{customdata[0]:.4f}; q %{customdata[1]:.2g}; %{customdata[2]} probes)<extra></extra>',
  }];
}

/** One line about what the removal costs, for the head of the panel. */
export function costHeadline(cost: UnitCost): string {
  if (cost.hurt.length === 0) {
    return cost.overall.costly
      ? 'No label loses more than the others, but every probe pays alike: the model gets worse across the board.'
      : 'No label is hurt measurably.';
  }
  const concepts = cost.conceptsHurt;
  const kind = concepts >= 1.5 ? `${concepts.toFixed(1)} unrelated concepts` : 'one concept';
  return `Hurts ${cost.hurt.length} label${cost.hurt.length > 1 ? 's' : ''} — ${kind}.`;
}

/** The layer view's chart: concepts hurt per unit (bars, ranked) beside the concepts driving it (dots). */
export function tollTraces(rows: { unit: number; conceptsHurt: number; hurtCount: number; hurt: string[]; drivers: string[]; driverConcepts: number | null }[], hurtColor: string, driverColor: string): Record<string, unknown>[] {
  const x = rows.map((r) => String(r.unit));
  return [
    { type: 'bar', name: 'concepts hurt when removed', x, y: rows.map((r) => r.conceptsHurt), marker: { color: hurtColor },
      customdata: rows.map((r) => r.hurt.join(', ') || 'none'), hovertemplate: 'unit %{x}: %{y:.2f} concepts hurt (%{customdata})<extra></extra>' },
    { type: 'scatter', mode: 'markers', name: 'concepts driving it', x, y: rows.map((r) => r.driverConcepts ?? 0), marker: { color: driverColor, size: 8, symbol: 'diamond' },
      customdata: rows.map((r) => r.drivers.join(', ') || 'none'), hovertemplate: 'unit %{x}: driven by %{customdata}<extra></extra>' },
  ];
}
