/** Number and text formatting shared by every screen (fixed en-US digits so screenshots and tests agree). */

const grouped = new Intl.NumberFormat('en-US');

/** 12345 → "12,345". */
export function count(n: number): string {
  return grouped.format(n);
}

/** Fixed decimals; "—" for a missing value. */
export function fixed(x: number | null | undefined, digits = 2): string {
  return x === null || x === undefined || !Number.isFinite(x) ? '—' : x.toFixed(digits);
}

/** A q- or p-value: three decimals down to 0.001, then scientific ("3.2e-7"); "< 1e-300" at underflow. */
export function pValue(q: number | null | undefined): string {
  if (q === null || q === undefined || !Number.isFinite(q)) return '—';
  if (q === 0) return '< 1e-300';
  if (q >= 0.001) return q.toFixed(3);
  const [m, e] = q.toExponential(1).split('e');
  return `${m}e${Number(e)}`;
}

/** 0.4231 → "42%"; digits after the point on request. */
export function percent(x: number | null | undefined, digits = 0): string {
  return x === null || x === undefined || !Number.isFinite(x) ? '—' : `${(x * 100).toFixed(digits)}%`;
}

/** Seconds left as a person says it: "12 s", "3 min 05 s", "1 h 02 min"; "estimating…" when unknown. */
export function eta(seconds: number | null | undefined): string {
  if (seconds === null || seconds === undefined || !Number.isFinite(seconds)) return 'estimating…';
  const s = Math.max(0, Math.round(seconds));
  if (s < 60) return `${s} s`;
  if (s < 3600) return `${Math.floor(s / 60)} min ${String(s % 60).padStart(2, '0')} s`;
  return `${Math.floor(s / 3600)} h ${String(Math.floor((s % 3600) / 60)).padStart(2, '0')} min`;
}

/** A tensor shape: [null, 64, "seq"] → "? × 64 × seq". */
export function shape(dims: (number | string | null)[] | null | undefined): string {
  if (!dims) return 'unknown';
  if (dims.length === 0) return 'scalar';
  return dims.map((d) => (d === null ? '?' : String(d))).join(' × ');
}

/** The last path segment, for titles ("/a/b/demo.study" → "demo.study"). */
export function baseName(p: string): string {
  const parts = p.split(/[\\/]/).filter(Boolean);
  return parts.length ? parts[parts.length - 1] : p;
}

/** The folder part of a path ("/a/b/c.onnx" → "/a/b"). */
export function dirName(p: string): string {
  const i = Math.max(p.lastIndexOf('/'), p.lastIndexOf('\\'));
  return i <= 0 ? (i === 0 ? p.slice(0, 1) : '') : p.slice(0, i);
}

/** "layer · unit" as every screen names a unit. */
export function unitName(layer: string, unit: number): string {
  return `${layer} · ${unit}`;
}
