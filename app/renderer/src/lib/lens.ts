/** Plain helpers of the Lens view (tested in test/renderer/lens.test.ts). */
import type { LensResult } from '../../../../core/api/contract.ts';

/** Segments from the origin to each carried concept's projected tip, one trace per concept (so each keeps its colour). */
export function directionTraces(r: LensResult, color: (name: string) => string, selected: string | null): Record<string, unknown>[] {
  return r.carriedOrder.map((t, i) => {
    const c = r.concepts[t];
    const on = selected === null || selected === c.name;
    return {
      type: 'scatter', mode: 'lines+markers+text', name: c.name,
      x: [0, r.projection.x[i]], y: [0, r.projection.y[i]], text: ['', c.name], textposition: 'top center',
      line: { color: color(c.name), width: selected === c.name ? 3.5 : 2 }, marker: { size: [0, 7], color: color(c.name) },
      opacity: on ? 1 : 0.35, textfont: { size: 11 }, cliponaxis: false,
      hovertemplate: `${c.name}<br>length in the picture %{customdata:.3f}<br>AUROC ${c.auroc?.toFixed(3)} · D ${c.dimensionality.toFixed(2)}<extra></extra>`,
      customdata: [0, Math.hypot(r.projection.x[i], r.projection.y[i])], showlegend: false,
    };
  });
}

/** A square range that holds every tip with room for its label. */
export function squareRange(r: LensResult): number {
  const reach = Math.max(1e-9, ...r.projection.x.map(Math.abs), ...r.projection.y.map(Math.abs));
  return reach * 1.25;
}

/** The interference matrix in clustered order, as a heatmap with the cosine written in each cell. */
export function cosineTrace(r: LensResult, low: string, mid: string, high: string): Record<string, unknown> {
  const names = r.carriedOrder.map((t) => r.concepts[t].name);
  return {
    type: 'heatmap', x: names, y: names, z: r.cosine, zmin: -1, zmax: 1,
    colorscale: [[0, low], [0.5, mid], [1, high]],
    text: r.cosine.map((row) => row.map((v) => v.toFixed(2))), texttemplate: r.cosine.length <= 16 ? '%{text}' : '', textfont: { size: 10 },
    hovertemplate: 'cos(%{y}, %{x}) = %{z:.3f}<extra></extra>', xgap: 1, ygap: 1, colorbar: { thickness: 10, len: 0.9, tickvals: [-1, 0, 1] },
  };
}

/** Localisation curves: AUROC from the best k units, one line per carried concept, on a log-2 k axis. */
export function curveTraces(r: LensResult, color: (name: string) => string, selected: string | null): Record<string, unknown>[] {
  return r.concepts.filter((c) => c.carried).map((c) => ({
    type: 'scatter', mode: 'lines+markers', name: c.name,
    x: c.curve.map((p) => p.k), y: c.curve.map((p) => p.auroc),
    line: { color: color(c.name), width: selected === c.name ? 3 : 1.5 }, marker: { size: 5 },
    opacity: selected === null || selected === c.name ? 1 : 0.3,
    hovertemplate: `${c.name}: AUROC %{y:.3f} from the best %{x} unit(s)<extra></extra>`,
  }));
}

export const LOCALITY_WORDS: Record<LensResult['concepts'][number]['locality'], string> = {
  local: 'one unit', few: 'two or three units', spread: 'four or more units', 'not carried': 'not carried linearly',
};
