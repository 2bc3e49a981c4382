/**
 * The report's plots as inline SVG text: no script, no fonts or images to fetch, no namespace URL (HTML5 inline SVG
 * needs none), presentation attributes only (no style attributes), so the report's strict content-security policy
 * holds. Every coordinate is rounded to 0.1 px.
 */

export const PALETTE = ['#3567a0', '#d08a2e', '#4a9466', '#b9475f', '#7859ad', '#8a7434', '#2f9096', '#a65f9a'];
export const STATUS_COLOURS: Record<string, string> = {
  unreviewed: '#a3a9b0', looking: '#d6a532', confirmed: '#4a9466', doubtful: '#c4533f', parked: '#6f7f99',
};

export function escapeXml(s: string): string {
  return s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&#39;');
}

const r1 = (x: number) => (Math.round(x * 10) / 10).toString();

function svgOpen(width: number, height: number, title: string): string {
  return `<svg viewBox="0 0 ${width} ${height}" width="${width}" height="${height}" role="img" class="plot"><title>${escapeXml(title)}</title>`;
}

/** Short tick labels: 3 significant digits, no exponent for everyday magnitudes. */
export function tickText(x: number): string {
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e4 || a < 1e-3) return x.toExponential(1);
  return Number(x.toPrecision(3)).toString();
}

/** "Nice" ticks over [min, max] (steps of 1, 2 or 5 × 10^k; common practice, no source). */
export function niceTicks(min: number, max: number, count = 5): number[] {
  if (!(max > min)) return [min];
  const raw = (max - min) / count;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  for (let t = Math.ceil(min / step) * step; t <= max + step * 1e-9; t += step) out.push(Math.abs(t) < step * 1e-9 ? 0 : t);
  return out;
}

/** One horizontal bar split by share, labelled below: how a unit's evidence divides among its driving labels. */
export function mixtureBar(drivers: readonly { label: string; share: number }[], width = 460): string {
  const barH = 18;
  const legendRows = Math.max(1, Math.ceil(drivers.length / 3));
  const height = barH + 10 + legendRows * 16;
  let s = svgOpen(width, height, drivers.length ? `Mixture: ${drivers.map((d) => `${d.label} ${Math.round(d.share * 100)}%`).join(', ')}` : 'No driving label');
  if (!drivers.length) {
    s += `<rect x="0.5" y="0.5" width="${width - 1}" height="${barH}" fill="none" stroke="#b8bec6" stroke-dasharray="4 3"/>`;
    s += `<text x="8" y="13" class="muted">no label passes the driver test</text></svg>`;
    return s;
  }
  const total = drivers.reduce((a, d) => a + d.share, 0) || 1;
  let x = 0;
  drivers.forEach((d, i) => {
    const w = (d.share / total) * width;
    s += `<rect x="${r1(x)}" y="0" width="${r1(Math.max(0, w - 1))}" height="${barH}" fill="${PALETTE[i % PALETTE.length]}"/>`;
    if (w > 34) s += `<text x="${r1(x + 5)}" y="13" class="on-bar">${Math.round(d.share * 100)}%</text>`;
    x += w;
  });
  drivers.forEach((d, i) => {
    const col = i % 3;
    const row = Math.floor(i / 3);
    const lx = col * (width / 3);
    const ly = barH + 10 + row * 16;
    s += `<rect x="${r1(lx)}" y="${ly}" width="10" height="10" fill="${PALETTE[i % PALETTE.length]}"/>`;
    s += `<text x="${r1(lx + 14)}" y="${ly + 9}">${escapeXml(clip(d.label, 26))} ${Math.round(d.share * 100)}%</text>`;
  });
  return s + '</svg>';
}

function clip(s: string, n: number): string {
  return s.length > n ? `${s.slice(0, n - 1)}…` : s;
}

export interface HistogramInput {
  edges: number[];
  all: number[];
  labels: { label: string; n: number; counts: number[] }[];
}

/**
 * Activation histogram: all probes as grey bars, each chosen label's probes as a coloured step line, each scaled to
 * its own total (share of that group's probes per bin) so shapes compare across groups of different size.
 */
export function histogramPlot(h: HistogramInput, width = 460): string {
  const m = { l: 44, r: 10, t: 8 };
  const pw = width - m.l - m.r;
  const ph = 130;
  const height = m.t + ph + 38 + Math.ceil((h.labels.length + 1) / 3) * 15;
  const bins = h.all.length;
  const totalAll = h.all.reduce((a, b) => a + b, 0) || 1;
  const shares = [h.all.map((c) => c / totalAll), ...h.labels.map((l) => l.counts.map((c) => c / (l.n || 1)))];
  const top = Math.max(1e-9, ...shares.flat());
  const xOf = (i: number) => m.l + (i / bins) * pw;
  const yOf = (v: number) => m.t + ph - (v / top) * ph;
  let s = svgOpen(width, height, `Activation distribution over ${totalAll} probes${h.labels.length ? `, with ${h.labels.map((l) => l.label).join(', ')}` : ''}`);
  s += `<rect x="${m.l}" y="${m.t}" width="${pw}" height="${ph}" fill="#fafbfc" stroke="#e1e4e8"/>`;
  for (const t of niceTicks(0, top, 4)) {
    const y = yOf(t);
    s += `<line x1="${m.l}" x2="${m.l + pw}" y1="${r1(y)}" y2="${r1(y)}" stroke="#e1e4e8"/><text x="${m.l - 4}" y="${r1(y + 3)}" class="tick" text-anchor="end">${Math.round(t * 100)}%</text>`;
  }
  shares[0].forEach((v, i) => {
    const y = yOf(v);
    s += `<rect x="${r1(xOf(i) + 0.5)}" y="${r1(y)}" width="${r1(Math.max(0.5, pw / bins - 1))}" height="${r1(m.t + ph - y)}" fill="#c9ced5"/>`;
  });
  shares.slice(1).forEach((row, k) => {
    let d = '';
    row.forEach((v, i) => {
      const y = r1(yOf(v));
      d += `${i === 0 ? 'M' : 'L'}${r1(xOf(i))},${y}L${r1(xOf(i + 1))},${y}`;
    });
    s += `<path d="${d}" fill="none" stroke="${PALETTE[k % PALETTE.length]}" stroke-width="1.6"/>`;
  });
  const lo = h.edges[0];
  const hi = h.edges[h.edges.length - 1];
  for (const t of niceTicks(lo, hi, 5)) {
    const x = m.l + (hi > lo ? ((t - lo) / (hi - lo)) * pw : 0);
    s += `<line x1="${r1(x)}" x2="${r1(x)}" y1="${m.t + ph}" y2="${m.t + ph + 4}" stroke="#8a9099"/><text x="${r1(x)}" y="${m.t + ph + 15}" class="tick" text-anchor="middle">${tickText(t)}</text>`;
  }
  s += `<text x="${m.l + pw / 2}" y="${m.t + ph + 27}" class="axis" text-anchor="middle">activation (share of each group's probes per bin)</text>`;
  const legend = [{ label: `all ${totalAll} probes`, colour: '#c9ced5' }, ...h.labels.map((l, k) => ({ label: `${l.label} (${l.n})`, colour: PALETTE[k % PALETTE.length] }))];
  legend.forEach((e, i) => {
    const lx = m.l + (i % 3) * (pw / 3);
    const ly = m.t + ph + 38 + Math.floor(i / 3) * 15;
    s += `<rect x="${r1(lx)}" y="${ly}" width="14" height="${i === 0 ? 9 : 3}" fill="${e.colour}"/><text x="${r1(lx + 18)}" y="${ly + 8}">${escapeXml(clip(e.label, 24))}</text>`;
  });
  return s + '</svg>';
}

/** Up to this many units are drawn one dot each; more become a binned density (so 10^5 units stay a small file). */
export const MAX_OVERVIEW_POINTS = 2000;

/**
 * Where the reported units sit among all scored units: concept count against selectivity, all units as grey dots
 * (or their binned density), the reported ones as numbered dots.
 */
export function overviewPlot(all: { x: number; y: number }[], marks: { x: number; y: number; label: string; colour: string }[], width = 620, height = 300): string {
  const m = { l: 46, r: 14, t: 10, b: 36 };
  const pw = width - m.l - m.r;
  const ph = height - m.t - m.b;
  const finite = all.filter((p) => Number.isFinite(p.x) && Number.isFinite(p.y));
  const xMax = Math.max(2, ...finite.map((p) => p.x), ...marks.map((p) => p.x)) * 1.05;
  const yMin = Math.min(0, ...finite.map((p) => p.y));
  const yMax = Math.max(1, ...finite.map((p) => p.y));
  const xOf = (x: number) => m.l + (x / xMax) * pw;
  const yOf = (y: number) => m.t + ph - ((y - yMin) / (yMax - yMin)) * ph;
  const bx = 48;
  const by = 24;
  const grid = new Uint32Array(bx * by);
  for (const p of finite) {
    const i = Math.min(bx - 1, Math.max(0, Math.floor((p.x / xMax) * bx)));
    const j = Math.min(by - 1, Math.max(0, Math.floor(((p.y - yMin) / (yMax - yMin)) * by)));
    grid[j * bx + i]++;
  }
  const peak = Math.max(1, ...grid);
  let s = svgOpen(width, height, `${finite.length} scored units by concept count and selectivity; ${marks.length} in this report`);
  s += `<rect x="${m.l}" y="${m.t}" width="${pw}" height="${ph}" fill="#fafbfc" stroke="#e1e4e8"/>`;
  const cw = pw / bx;
  const ch = ph / by;
  if (finite.length <= MAX_OVERVIEW_POINTS) {
    for (const p of finite) s += `<circle cx="${r1(xOf(p.x))}" cy="${r1(yOf(p.y))}" r="2.5" fill="#7d8794" fill-opacity="0.55"/>`;
  } else for (let j = 0; j < by; j++) {
    for (let i = 0; i < bx; i++) {
      const c = grid[j * bx + i];
      if (!c) continue;
      // Square-root shading so a few units in a bin stay visible next to a crowded one.
      const a = 0.12 + 0.78 * Math.sqrt(c / peak);
      s += `<rect x="${r1(m.l + i * cw)}" y="${r1(m.t + ph - (j + 1) * ch)}" width="${r1(cw)}" height="${r1(ch)}" fill="#7d8794" fill-opacity="${a.toFixed(2)}"/>`;
    }
  }
  for (const t of niceTicks(0, xMax, 6)) {
    const x = xOf(t);
    s += `<line x1="${r1(x)}" x2="${r1(x)}" y1="${m.t}" y2="${m.t + ph}" stroke="#eceef1"/><text x="${r1(x)}" y="${m.t + ph + 14}" class="tick" text-anchor="middle">${tickText(t)}</text>`;
  }
  for (const t of niceTicks(yMin, yMax, 4)) {
    const y = yOf(t);
    s += `<text x="${m.l - 5}" y="${r1(y + 3)}" class="tick" text-anchor="end">${tickText(t)}</text>`;
  }
  marks.forEach((p) => {
    const x = xOf(p.x);
    const y = yOf(p.y);
    s += `<circle cx="${r1(x)}" cy="${r1(y)}" r="7" fill="${p.colour}" stroke="#ffffff" stroke-width="1.5"/><text x="${r1(x)}" y="${r1(y + 3)}" class="mark" text-anchor="middle">${escapeXml(p.label)}</text>`;
  });
  s += `<text x="${m.l + pw / 2}" y="${height - 4}" class="axis" text-anchor="middle">concept count (effective number of driving concepts)</text>`;
  s += `<text x="12" y="${m.t + ph / 2}" class="axis" text-anchor="middle" transform="rotate(-90 12 ${m.t + ph / 2})">selectivity</text>`;
  return s + '</svg>';
}

/** Units per review status as one stacked bar with counts. */
export function statusBar(counts: { status: string; count: number }[], width = 620): string {
  const total = counts.reduce((a, c) => a + c.count, 0);
  const height = 44;
  let s = svgOpen(width, height, counts.map((c) => `${c.status}: ${c.count}`).join(', '));
  if (!total) return s + `<text x="0" y="14" class="muted">no units</text></svg>`;
  let x = 0;
  let lx = 0;
  for (const c of counts) {
    if (!c.count) continue;
    const w = (c.count / total) * width;
    s += `<rect x="${r1(x)}" y="0" width="${r1(Math.max(0, w - 1))}" height="16" fill="${STATUS_COLOURS[c.status] ?? '#999'}"/>`;
    x += w;
  }
  for (const c of counts) {
    s += `<rect x="${r1(lx)}" y="26" width="10" height="10" fill="${STATUS_COLOURS[c.status] ?? '#999'}"/><text x="${r1(lx + 14)}" y="35">${escapeXml(c.status)} ${c.count}</text>`;
    lx += width / counts.length;
  }
  return s + '</svg>';
}
