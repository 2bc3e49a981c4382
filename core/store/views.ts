/**
 * Read-only queries the screens need beyond `skein rank` / `skein unit`: the compact unit table, per-label activation
 * histograms, units that move together, one label's reach, per-layer shares and example images.
 * Each takes an open study database; none writes.
 */
import fs from 'node:fs';
import path from 'node:path';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readRun, readLayers, findLayer, readUnit, blobToFloats, type LayerRow, type RunRow } from './study.ts';
import { requireScores, labelNames } from './queries.ts';

/** A unit is called polysemantic on the screens when its concept count is at least this (half-way between one and two effective concepts). */
export const POLYSEMANTIC_AT = 1.5;

/** Bit flags of UnitTable.flags. */
export const FLAG_DEAD = 1;
export const FLAG_DENSE = 2;

/** The thresholds the stored scores were computed with, for the screens' explanations. */
export interface ScoreThresholds { maxQ: number; minAuroc: number; topQuantile: number; deadFraction: number; denseFraction: number; polysemanticAt: number }

/**
 * Every scored unit as column arrays (one entry per unit, ordered by study rank), so 10^5 units cross the wire
 * without repeating keys. Drivers are CSR: row i's drivers are driverLabel/driverShare[driverOffsets[i] .. driverOffsets[i+1]),
 * largest share first; labels are indices into `labels`, layers indices into `layers`.
 */
export interface UnitTable {
  layers: { name: string; kind: LayerRow['kind']; units: number; dims: number[] }[];
  labels: string[];
  count: number;
  layer: number[];
  unit: number[];
  rank: number[];
  /** Rounded to 4 decimals (display precision); null where the score is not a number. */
  conceptCount: (number | null)[];
  selectivity: (number | null)[];
  /** FLAG_DEAD | FLAG_DENSE. */
  flags: number[];
  driverOffsets: number[];
  driverLabel: number[];
  driverShare: number[];
  thresholds: ScoreThresholds;
}

function round4(x: number): number | null {
  return Number.isFinite(x) ? Math.round(x * 1e4) / 1e4 : null;
}

function flagBits(flags: string): number {
  return (flags.includes('"dead"') ? FLAG_DEAD : 0) | (flags.includes('"dense"') ? FLAG_DENSE : 0);
}

export function scoreThresholds(db: Database.Database): ScoreThresholds {
  const json = db.prepare(`SELECT options_json FROM score_run WHERE id = 1`).pluck().get() as string | undefined;
  const o = json ? (JSON.parse(json) as Partial<ScoreThresholds>) : {};
  return {
    maxQ: o.maxQ ?? NaN, minAuroc: o.minAuroc ?? NaN, topQuantile: o.topQuantile ?? NaN,
    deadFraction: o.deadFraction ?? NaN, denseFraction: o.denseFraction ?? NaN, polysemanticAt: POLYSEMANTIC_AT,
  };
}

export function unitTable(db: Database.Database, file?: string): UnitTable {
  requireScores(db, file);
  const layers = readLayers(db);
  const layerIndex = new Map(layers.map((l, i) => [l.id, i]));
  const rows = db.prepare(`SELECT layer_id, unit, rank, concept_count, selectivity, flags, drivers FROM unit_score ORDER BY rank`).raw().all() as
    [number, number, number, number, number, string, string][];
  const t: UnitTable = {
    layers: layers.map((l) => ({ name: l.name, kind: l.kind, units: l.units, dims: l.dims })),
    labels: labelNames(db), count: rows.length,
    layer: new Array(rows.length), unit: new Array(rows.length), rank: new Array(rows.length),
    conceptCount: new Array(rows.length), selectivity: new Array(rows.length), flags: new Array(rows.length),
    driverOffsets: new Array(rows.length + 1), driverLabel: [], driverShare: [], thresholds: scoreThresholds(db),
  };
  t.driverOffsets[0] = 0;
  rows.forEach(([layerId, unit, rank, cc, sel, flags, drivers], i) => {
    t.layer[i] = layerIndex.get(layerId)!;
    t.unit[i] = unit;
    t.rank[i] = rank;
    t.conceptCount[i] = round4(cc);
    t.selectivity[i] = round4(sel);
    t.flags[i] = flagBits(flags);
    for (const d of JSON.parse(drivers) as { label: number; share: number }[]) {
      t.driverLabel.push(d.label);
      t.driverShare.push(round4(d.share) ?? 0);
    }
    t.driverOffsets[i + 1] = t.driverLabel.length;
  });
  return t;
}

/** Bin of v among `bins` equal-width bins starting at `min` (the last bin is closed on the right). */
export function binOf(v: number, min: number, width: number, bins: number): number {
  if (!(width > 0)) return 0;
  const b = Math.floor((v - min) / width);
  return b < 0 ? 0 : b >= bins ? bins - 1 : b;
}

export interface UnitDistributions {
  layer: string;
  unit: number;
  probes: number;
  /** The unit's lowest activation (a ReLU unit's 0): probes at exactly this value are counted apart, in atFloor. */
  floor: number;
  /** bins + 1 edges over [floor, max]; the bins count only probes above the floor. */
  edges: number[];
  all: number[];
  allAtFloor: number;
  labels: { label: string; n: number; counts: number[]; atFloor: number; auroc: number; isDriver: boolean }[];
}

/**
 * Histograms of one unit's activations over all probes and over the probes of each chosen label (default: its drivers,
 * then the labels with the highest AUROC, up to maxLabels). Reads the unit's N activations once. Probes at the unit's
 * floor are counted apart: for a ReLU unit they are often most probes, and one bar that tall would flatten the rest.
 */
export function unitDistributions(db: Database.Database, layerName: string, unit: number, opts: { bins?: number; labels?: string[]; maxLabels?: number; file?: string } = {}): UnitDistributions {
  requireScores(db, opts.file);
  const run = readRun(db) as RunRow;
  const layer = findLayer(db, layerName, opts.file);
  checkUnit(layer, unit, opts.file);
  const names = labelNames(db);
  const bins = opts.bins ?? 40;
  const maxLabels = opts.maxLabels ?? 6;
  const driverRow = db.prepare(`SELECT drivers FROM unit_score WHERE layer_id = ? AND unit = ?`).pluck().get(layer.id, unit) as string;
  const driverIds = (JSON.parse(driverRow) as { label: number }[]).map((d) => d.label);
  const auroc = new Map((db.prepare(`SELECT label, auroc FROM unit_label WHERE layer_id = ? AND unit = ? ORDER BY auroc DESC`).raw().all(layer.id, unit) as [number, number][]));
  let chosen: number[];
  if (opts.labels?.length) {
    chosen = opts.labels.map((name, i) => {
      const id = names.indexOf(name);
      if (id < 0) throw new SkeinError({ code: 'request', file: opts.file, where: `labels.${i}`, message: `No label "${name}" in this study.` });
      return id;
    });
  } else {
    chosen = [...driverIds];
    for (const id of auroc.keys()) if (chosen.length < maxLabels && !chosen.includes(id)) chosen.push(id);
    chosen = chosen.slice(0, Math.max(maxLabels, driverIds.length));
  }
  const values = readUnit(db, run, layer.id, unit);
  let min = Infinity;
  let max = -Infinity;
  for (let i = 0; i < values.length; i++) {
    if (values[i] < min) min = values[i];
    if (values[i] > max) max = values[i];
  }
  if (!Number.isFinite(min)) { min = 0; max = 0; }
  const width = (max - min) / bins;
  const FLOOR = -1;
  const binIndex = new Int32Array(values.length);
  const all = new Array(bins).fill(0);
  let allAtFloor = 0;
  for (let i = 0; i < values.length; i++) {
    if (values[i] === min) { binIndex[i] = FLOOR; allAtFloor++; } else all[(binIndex[i] = binOf(values[i], min, width, bins))]++;
  }
  const slot = new Map(chosen.map((id, i) => [id, i]));
  const counts = chosen.map(() => new Array(bins).fill(0));
  const n = chosen.map(() => 0);
  const atFloor = chosen.map(() => 0);
  if (chosen.length) {
    const rows = db.prepare(`SELECT probe, label FROM probe_label WHERE label IN (${chosen.map(() => '?').join(',')})`).raw().iterate(...chosen) as IterableIterator<[number, number]>;
    for (const [probe, label] of rows) {
      const s = slot.get(label)!;
      if (binIndex[probe] === FLOOR) atFloor[s]++;
      else counts[s][binIndex[probe]]++;
      n[s]++;
    }
  }
  return {
    layer: layer.name, unit, probes: run.probeCount, floor: min,
    edges: Array.from({ length: bins + 1 }, (_, i) => (i === bins ? max : min + i * width)),
    all, allAtFloor,
    labels: chosen.map((id, i) => ({ label: names[id], n: n[i], counts: counts[i], atFloor: atFloor[i], auroc: auroc.get(id) ?? NaN, isDriver: driverIds.includes(id) })),
  };
}

function checkUnit(layer: LayerRow, unit: number, file?: string): void {
  if (!Number.isInteger(unit) || unit < 0 || unit >= layer.units) {
    throw new SkeinError({ code: 'request', file, where: 'unit', message: `Layer ${layer.name} has units 0–${layer.units - 1}; ${unit} is out of range.` });
  }
}

/** Pearson correlation of two equal-length samples given their means (Pearson 1895); NaN when either is constant. */
export function pearson(a: Float32Array, meanA: number, b: Float32Array, meanB: number, n: number): number {
  let sab = 0;
  let saa = 0;
  let sbb = 0;
  for (let i = 0; i < n; i++) {
    const da = a[i] - meanA;
    const db = b[i] - meanB;
    sab += da * db;
    saa += da * da;
    sbb += db * db;
  }
  return saa > 0 && sbb > 0 ? sab / Math.sqrt(saa * sbb) : NaN;
}

/** Chunks spread evenly over [0, chunks): the fixed probe sample of similarUnits. */
export function sampleChunks(chunks: number, wanted: number): number[] {
  const k = Math.max(1, Math.min(chunks, wanted));
  const out: number[] = [];
  for (let i = 0; i < k; i++) out.push(Math.floor((i * chunks) / k));
  return out;
}

export interface SimilarUnits {
  layer: string;
  unit: number;
  /** Probes the correlation was computed on, of `probes`. */
  sample: number;
  probes: number;
  /** True when the unit is constant on the sample (no correlation is defined). */
  constant: boolean;
  units: { unit: number; r: number; conceptCount: number; drivers: string[] }[];
}

/**
 * Units of the same layer whose activations correlate most with this one's (Pearson r), on a fixed sample of at most
 * `sampleProbes` probes taken from chunks spread over the probe set, so the work is bounded by units × sample.
 */
export function similarUnits(db: Database.Database, layerName: string, unit: number, opts: { top?: number; sampleProbes?: number; file?: string } = {}): SimilarUnits {
  requireScores(db, opts.file);
  const run = readRun(db) as RunRow;
  const layer = findLayer(db, layerName, opts.file);
  checkUnit(layer, unit, opts.file);
  const top = opts.top ?? 12;
  const sampleProbes = opts.sampleProbes ?? 4096;
  const chunkCount = Math.ceil(run.probeCount / run.chunkSize);
  const chunks = sampleChunks(chunkCount, Math.ceil(sampleProbes / run.chunkSize));
  const lengths = chunks.map((c) => Math.min(run.chunkSize, run.probeCount - c * run.chunkSize));
  const inChunks = lengths.reduce((a, b) => a + b, 0);
  const stride = Math.max(1, Math.ceil(inChunks / sampleProbes));
  const n = Math.ceil(inChunks / stride);
  const placeholders = chunks.map(() => '?').join(',');
  const stmt = db.prepare(`SELECT unit, chunk, vals FROM activation WHERE layer_id = ? AND chunk IN (${placeholders}) ORDER BY unit, chunk`).raw();

  // Concatenates the chunks of one unit and keeps every stride-th probe.
  const gather = (parts: Map<number, Buffer>, out: Float32Array): number => {
    let k = 0;
    let pos = 0;
    let sum = 0;
    for (const c of chunks) {
      const v = blobToFloats(parts.get(c)!);
      for (let i = 0; i < v.length; i++, pos++) {
        if (pos % stride === 0) { out[k++] = v[i]; sum += v[i]; }
      }
    }
    return sum / n;
  };
  const target = new Float32Array(n);
  const targetParts = new Map<number, Buffer>();
  for (const [, c, vals] of db.prepare(`SELECT unit, chunk, vals FROM activation WHERE layer_id = ? AND unit = ? AND chunk IN (${placeholders})`).raw().iterate(layer.id, unit, ...chunks) as IterableIterator<[number, number, Buffer]>) targetParts.set(c, vals);
  if (targetParts.size !== chunks.length) throw new SkeinError({ code: 'study', file: opts.file, where: `layer ${layer.name}`, message: 'The scan of this layer is incomplete. Run the scan again to finish it.' });
  const targetMean = gather(targetParts, target);
  let constant = true;
  for (let i = 1; i < n; i++) if (target[i] !== target[0]) { constant = false; break; }

  const found: { unit: number; r: number }[] = [];
  if (!constant) {
    const other = new Float32Array(n);
    let current = -1;
    let parts = new Map<number, Buffer>();
    const flush = () => {
      if (current < 0 || current === unit || parts.size !== chunks.length) return;
      const r = pearson(target, targetMean, other, gather(parts, other), n);
      if (Number.isFinite(r)) found.push({ unit: current, r });
    };
    for (const [u, c, vals] of stmt.iterate(layer.id, ...chunks) as IterableIterator<[number, number, Buffer]>) {
      if (u !== current) { flush(); current = u; parts = new Map(); }
      parts.set(c, vals);
    }
    flush();
  }
  found.sort((a, b) => b.r - a.r || a.unit - b.unit);
  const names = labelNames(db);
  const info = db.prepare(`SELECT concept_count, drivers FROM unit_score WHERE layer_id = ? AND unit = ?`).raw();
  return {
    layer: layer.name, unit, sample: n, probes: run.probeCount, constant,
    units: found.slice(0, top).map(({ unit: u, r }) => {
      const [cc, drivers] = info.get(layer.id, u) as [number, string];
      return { unit: u, r, conceptCount: cc, drivers: (JSON.parse(drivers) as { label: number }[]).slice(0, 3).map((d) => names[d.label]) };
    }),
  };
}

export interface ConceptReachRow {
  layer: string; unit: number; auroc: number; q: number; share: number;
  /** This label is the unit's only driver. */
  onlyDriver: boolean;
  driverCount: number;
  conceptCount: number;
  otherDrivers: string[];
}

export interface ConceptReach {
  label: string;
  /** Probes carrying the label. */
  probes: number;
  totalUnits: number;
  /** Units with this label among their drivers, largest share first (at most `top`). */
  drivers: ConceptReachRow[];
  driverOf: number;
  onlyDriverOf: number;
  /** Highest-AUROC units for which the label is not a driver (at most 20). */
  nearMisses: { layer: string; unit: number; auroc: number; q: number; topHits: number }[];
  /** Units per AUROC bin over [0, 1], 20 bins: how broadly the label moves units. */
  aurocHistogram: number[];
}

/** For one label: the units it drives, how exclusively, and how AUROC spreads over all units. */
export function conceptReach(db: Database.Database, labelName: string, opts: { top?: number; file?: string } = {}): ConceptReach {
  requireScores(db, opts.file);
  const names = labelNames(db);
  const id = names.indexOf(labelName);
  if (id < 0) throw new SkeinError({ code: 'request', file: opts.file, where: 'label', message: `No label "${labelName}" in this study. Labels: ${names.slice(0, 12).join(', ')}${names.length > 12 ? ', …' : ''}.` });
  const layers = new Map(readLayers(db).map((l) => [l.id, l.name]));
  const top = opts.top ?? 500;
  const rows = db.prepare(`SELECT s.layer_id, s.unit, s.concept_count, s.drivers, l.auroc, l.q FROM unit_score s
      JOIN unit_label l ON l.layer_id = s.layer_id AND l.unit = s.unit AND l.label = ?
      WHERE EXISTS (SELECT 1 FROM json_each(s.drivers) j WHERE json_extract(j.value, '$.label') = ?)`).raw().all(id, id) as [number, number, number, string, number, number][];
  const drivers: ConceptReachRow[] = rows.map(([layerId, unit, cc, json, auroc, q]) => {
    const ds = JSON.parse(json) as { label: number; share: number }[];
    const mine = ds.find((d) => d.label === id)!;
    return {
      layer: layers.get(layerId)!, unit, auroc, q, share: mine.share, onlyDriver: ds.length === 1, driverCount: ds.length,
      conceptCount: cc, otherDrivers: ds.filter((d) => d.label !== id).map((d) => names[d.label]),
    };
  });
  drivers.sort((a, b) => b.share - a.share || b.auroc - a.auroc);
  const driverKeys = new Set(drivers.map((d) => `${d.layer}\u0000${d.unit}`));
  const nearMisses: ConceptReach['nearMisses'] = [];
  for (const [layerId, unit, auroc, q, topHits] of db.prepare(`SELECT layer_id, unit, auroc, q, top_hits FROM unit_label WHERE label = ? ORDER BY auroc DESC`).raw().iterate(id) as IterableIterator<[number, number, number, number, number]>) {
    if (nearMisses.length >= 20) break;
    if (!driverKeys.has(`${layers.get(layerId)}\u0000${unit}`)) nearMisses.push({ layer: layers.get(layerId)!, unit, auroc, q, topHits });
  }
  const aurocHistogram = new Array(20).fill(0);
  for (const a of db.prepare(`SELECT auroc FROM unit_label WHERE label = ?`).pluck().iterate(id) as IterableIterator<number>) {
    if (Number.isFinite(a)) aurocHistogram[binOf(a, 0, 0.05, 20)]++;
  }
  return {
    label: labelName,
    probes: db.prepare(`SELECT count(*) FROM probe_label WHERE label = ?`).pluck().get(id) as number,
    totalUnits: db.prepare(`SELECT count(*) FROM unit_score`).pluck().get() as number,
    drivers: drivers.slice(0, top), driverOf: drivers.length, onlyDriverOf: drivers.filter((d) => d.onlyDriver).length,
    nearMisses, aurocHistogram,
  };
}

export interface LayerOverviewRow {
  name: string; op: string; kind: LayerRow['kind']; units: number;
  dead: number; dense: number;
  /** Not dead or dense and no label passes the driver test. */
  undriven: number;
  /** Concept count in (0, POLYSEMANTIC_AT). */
  single: number;
  /** Concept count ≥ POLYSEMANTIC_AT. */
  polysemantic: number;
  meanConceptCount: number | null;
  maxConceptCount: number;
  /** Units per concept-count bin (edges in LayerOverview.edges). */
  histogram: number[];
}

export interface LayerOverview { polysemanticAt: number; edges: number[]; layers: LayerOverviewRow[]; thresholds: ScoreThresholds }

/** Per layer: how concept counts spread and what share of units is polysemantic, dead or dense. */
export function layerOverview(db: Database.Database, file?: string): LayerOverview {
  requireScores(db, file);
  const layers = readLayers(db);
  const rows = db.prepare(`SELECT layer_id, concept_count, flags FROM unit_score`).raw().all() as [number, number, string][];
  let globalMax = 0;
  for (const [, cc] of rows) if (cc > globalMax) globalMax = cc;
  const width = 0.25;
  const bins = Math.max(8, Math.ceil(globalMax / width));
  const byLayer = new Map(layers.map((l) => [l.id, {
    name: l.name, op: l.op, kind: l.kind, units: l.units, dead: 0, dense: 0, undriven: 0, single: 0, polysemantic: 0,
    meanConceptCount: null as number | null, maxConceptCount: 0, histogram: new Array(bins).fill(0), sum: 0, driven: 0,
  }]));
  for (const [layerId, cc, flags] of rows) {
    const s = byLayer.get(layerId)!;
    const f = flagBits(flags);
    if (f & FLAG_DEAD) s.dead++;
    if (f & FLAG_DENSE) s.dense++;
    if (cc >= POLYSEMANTIC_AT) s.polysemantic++;
    else if (cc > 0) s.single++;
    else if (!f) s.undriven++;
    if (cc > 0) { s.sum += cc; s.driven++; }
    if (cc > s.maxConceptCount) s.maxConceptCount = cc;
    s.histogram[binOf(cc, 0, width, bins)]++;
  }
  return {
    polysemanticAt: POLYSEMANTIC_AT, thresholds: scoreThresholds(db),
    edges: Array.from({ length: bins + 1 }, (_, i) => i * width),
    layers: [...byLayer.values()].map(({ sum, driven, ...s }) => ({ ...s, meanConceptCount: driven ? sum / driven : null })),
  };
}

const IMAGE_TYPES: Record<string, string> = { '.png': 'image/png', '.jpg': 'image/jpeg', '.jpeg': 'image/jpeg', '.gif': 'image/gif', '.webp': 'image/webp', '.bmp': 'image/bmp' };
const MAX_IMAGE_BYTES = 16 << 20;

/** True when `target` (symlinks resolved) lies inside `dir`. */
function liesInside(dir: string, target: string): boolean {
  const rel = path.relative(fs.realpathSync(dir), fs.realpathSync(target));
  return rel !== '' && !rel.startsWith('..') && !path.isAbsolute(rel);
}

/** The image of one probe as a data: URL, read from the probe-set folder; refuses any path leaving that folder. */
export function exampleImage(db: Database.Database, probe: number, file?: string): { dataUrl: string; mime: string; bytes: number } {
  const run = readRun(db);
  if (!run) throw new SkeinError({ code: 'study', file, message: 'This study has no scan yet. Start a scan into it.' });
  const row = db.prepare(`SELECT image FROM example WHERE probe = ?`).get(probe) as { image: string | null } | undefined;
  if (!row?.image) throw new SkeinError({ code: 'request', file, where: 'probe', message: `Probe ${probe} has no image in this study's examples.` });
  const abs = path.resolve(run.probesDir, row.image);
  const mime = IMAGE_TYPES[path.extname(abs).toLowerCase()];
  const lexical = path.relative(path.resolve(run.probesDir), abs);
  if (lexical.startsWith('..') || path.isAbsolute(lexical)) throw new SkeinError({ code: 'probes', file: abs, where: `probe ${probe}`, message: `This example image lies outside the probe-set folder ${run.probesDir}; Skein shows only images inside it.` });
  if (!fs.existsSync(abs)) throw new SkeinError({ code: 'probes', file: abs, where: `probe ${probe}`, message: 'The example image is missing from the probe-set folder. Restore the probe set where the study was scanned.' });
  if (!liesInside(run.probesDir, abs)) throw new SkeinError({ code: 'probes', file: abs, where: `probe ${probe}`, message: `This example image lies outside the probe-set folder ${run.probesDir}; Skein shows only images inside it.` });
  if (!mime) throw new SkeinError({ code: 'probes', file: abs, where: `probe ${probe}`, message: `Skein shows PNG, JPEG, GIF, WebP or BMP example images; this is "${path.extname(abs)}".` });
  const size = fs.statSync(abs).size;
  if (size > MAX_IMAGE_BYTES) throw new SkeinError({ code: 'probes', file: abs, where: `probe ${probe}`, message: `The example image is ${Math.round(size / 1048576)} MiB; Skein shows images up to 16 MiB. Use smaller thumbnails in the probe set.` });
  const bytes = fs.readFileSync(abs);
  return { dataUrl: `data:${mime};base64,${bytes.toString('base64')}`, mime, bytes: bytes.length };
}

/** Label names of each given probe (in the given order). */
export function probeLabels(db: Database.Database, probes: number[]): string[][] {
  const names = labelNames(db);
  const stmt = db.prepare(`SELECT label FROM probe_label WHERE probe = ? ORDER BY label`).pluck();
  return probes.map((p) => (stmt.all(p) as number[]).map((l) => names[l]));
}
