/** Pure helpers of the unit profile: where a conv unit peaked on its image, and the histogram traces. */
import type { UnitDistributions } from '../../../../core/api/contract.ts';

export interface SpatialBox { left: number; top: number; width: number; height: number; row: number; col: number; rows: number; cols: number }

/**
 * The cell of a conv layer's H×W grid that held the pooled maximum, in percent of the image (location = h·W + w,
 * dims = [C, H, W]). The grid is laid evenly over the image: a guide to where the unit looked, not its exact receptive field.
 */
export function spatialBox(kind: string, dims: number[], location: number | null): SpatialBox | null {
  if (kind !== 'conv' || location === null || dims.length !== 3) return null;
  const [, rows, cols] = dims;
  if (!(rows > 0 && cols > 0) || location < 0 || location >= rows * cols) return null;
  const row = Math.floor(location / cols);
  const col = location % cols;
  return { left: (col / cols) * 100, top: (row / rows) * 100, width: 100 / cols, height: 100 / rows, row, col, rows, cols };
}

/** Bin centres of a histogram's edges. */
export function binCentres(edges: number[]): number[] {
  return edges.slice(0, -1).map((e, i) => (e + edges[i + 1]) / 2);
}

/** Counts as shares of their group (so groups of different sizes compare); zeros when the group is empty. */
export function shares(counts: number[], n: number): number[] {
  return counts.map((c) => (n > 0 ? c / n : 0));
}

/**
 * Plotly traces: all probes (dotted) and one step line per label, each as a share of all its own probes, so what sits
 * at the floor (counted apart, not drawn) is the part that is missing from each line.
 */
export function histogramTraces(d: UnitDistributions, colorOf: (label: string) => string, allColor: string): Record<string, unknown>[] {
  const x = binCentres(d.edges);
  const total = d.all.reduce((a, b) => a + b, 0) + d.allAtFloor;
  const step = { type: 'scatter', mode: 'lines', x, line: { shape: 'hvh', width: 1.6 } };
  return [
    { ...step, name: `all probes (${total})`, y: shares(d.all, total), line: { ...step.line, color: allColor, dash: 'dot' }, hovertemplate: 'all: %{y:.1%} at %{x:.3f}<extra></extra>' },
    ...d.labels.map((l) => ({
      ...step, name: `${l.label}${l.isDriver ? ' ◆' : ''} (${l.n})`, y: shares(l.counts, l.n), line: { ...step.line, color: colorOf(l.label) },
      hovertemplate: `${l.label}: %{y:.1%} at %{x:.3f}<extra></extra>`,
    })),
  ];
}

/**
 * A probe's labels for its caption: the unit's driver labels first (in the drivers' order, marked), then the rest in
 * their own order; `omit` leaves out labels every card of a strip shares. Nothing is cut: the caption wraps.
 */
export function captionLabels(labels: readonly string[], drivers: readonly string[], omit: readonly string[] = []): { label: string; driver: boolean }[] {
  const kept = labels.filter((l) => !omit.includes(l));
  const first = drivers.filter((d) => kept.includes(d));
  return [...first.map((label) => ({ label, driver: true })), ...kept.filter((l) => !first.includes(l)).map((label) => ({ label, driver: false }))];
}
