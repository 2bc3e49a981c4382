/** Chart layout shared by every plot: the theme's colours, compact margins, no mode bar, no network. */
import { cssVar } from './theme.ts';

export const PLOT_CONFIG = { displayModeBar: false, responsive: true, displaylogo: false, scrollZoom: false };

export function themedLayout(layout: Record<string, unknown>, height: number): Record<string, unknown> {
  const text = cssVar('--text');
  const muted = cssVar('--muted');
  const line = cssVar('--line');
  const axis = { color: muted, gridcolor: line, zerolinecolor: line, linecolor: line, tickfont: { size: 10, color: muted }, title: { font: { size: 11, color: muted } } };
  const merge = (key: string) => ({ ...axis, ...((layout[key] as object) ?? {}), title: { ...axis.title, ...(((layout[key] as { title?: object })?.title) ?? {}) } });
  return {
    height,
    margin: { l: 44, r: 12, t: 8, b: 34 },
    paper_bgcolor: 'rgba(0,0,0,0)',
    plot_bgcolor: 'rgba(0,0,0,0)',
    font: { family: cssVar('--font-ui'), size: 11, color: text },
    hoverlabel: { font: { family: cssVar('--font-mono'), size: 11 }, bgcolor: cssVar('--panel'), bordercolor: line },
    legend: { font: { size: 10, color: text }, orientation: 'h', y: -0.25 },
    ...layout,
    xaxis: merge('xaxis'),
    yaxis: merge('yaxis'),
  };
}
