/**
 * Read-models: what the CLI and the screens show, assembled from the store's repositories (no SQL here). `skein rank`
 * and `skein unit` rows, the compact unit table, per-label activation histograms, units that move together, one
 * label's reach, per-layer kinds, example images and probe captions. Each takes an open study database; none writes.
 */
import type Database from 'better-sqlite3';
import { SkeinError } from '../../errors.ts';
import { requireBinding, readLayers, findLayer, labelNames, probesWithLabels, probeCountOfLabel, labelsOfProbes, readExample, type LayerRow } from '../../store/binding.ts';
import { readUnit, readUnitArgmax, readChunkSample } from '../../store/activations.ts';
import {
  requireScores, readScoreOptions, readUnitScores, readUnitScore, readUnitSummaries, readUnitSummary, readUnitsDrivenBy,
  readLabelStats, readLabelAurocs, unitsByAuroc, scoredUnitCount, type StoredUnitScore,
} from '../../store/scores.ts';
import { binOf, pearson } from '../../score/stats.ts';
import { readAllDrivers, readLayerNulls, readUnitDrivers, type DriverRecord } from '../../store/drivers.ts';
import { defaultScoreOptions } from '../../score/unit.ts';
import { UNIT_KINDS, classifyUnit, type UnitKind } from '../../score/kind.ts';
import { readExampleImage } from '../../probes/example-image.ts';
import { readConceptIntervals } from '../../store/evidence.ts';
import { checkStoredPath } from '../context.ts';

export { UNIT_KINDS, type UnitKind };

/** One ranked unit as `skein rank --json` prints it (field names fixed: other tools read them). */
export interface RankRow {
  layer: string;
  unit: number;
  conceptCount: number;
  /** 90% bootstrap interval of the concept count (the ranking uses the lower end) */
  conceptLow: number;
  conceptHigh: number;
  selectivity: number;
  flags: string[];
  /** label: the driver's label, or a compound's labels joined by " & " (all present together) */
  drivers: RankDriver[];
  /** labels that raise a driver's response only; not counted as concepts */
  modulators: { label: string; of: string; auroc: number; q: number; effect: number }[];
  /** labels set aside because they (nearly) contain a driver; `within` names that driver */
  nested: { label: string; within: string; auroc: number }[];
  /** formula: "a & b | c" (& binds tighter than |); threshold: the activation it binarises the unit at (null: top set) */
  explanation: { formula: string; iou: number; threshold: number | null; basis: 'drivers' | 'top set' } | null;
}

export interface RankDriver {
  label: string;
  labels: string[];
  auroc: number; q: number; share: number; shareLow: number; shareHigh: number;
  effect: number; upper: number;
  alone: { n: number; mean: number | null }; others: { n: number; mean: number | null }; none: { n: number; mean: number | null };
  /** other drivers counted as the same concept (their probes nearly coincide) */
  sameAs: string[];
}

/** Per layer: units called mixed with the real labels and, beside it, the shuffled-label baseline. */
export interface LayerNullRow { layer: string; units: number; mixedReal: number; mixedExpected: number; unitsSampled: number; mixedSampled: number; mixedAt: number }

export interface LabelStatRow {
  /** null when no probe has (or every probe has) the label */
  label: string; n1: number; meanWith: number | null; meanWithout: number | null; auroc: number; topHits: number; p: number; q: number;
  /** conditional AUROC and its BH q in the joint model (null when the label was not a candidate) */
  condAuroc: number | null; condQ: number | null;
}

export interface TopExample {
  probe: number; value: number;
  /** Flat location of the pooled maximum (h*W+w for conv units, t for sequences); null for dense units. */
  location: number | null;
  id: string | null; text: string | null; image: string | null;
}

export interface UnitDetail extends RankRow {
  rank: number;
  /** mixed | single | undriven | dead | dense (core/score/kind.ts). */
  kind: UnitKind;
  evidence: number;
  activeFraction: number;
  mean: number;
  max: number;
  topThreshold: number;
  layerKind: LayerRow['kind'];
  layerDims: number[];
  stats: LabelStatRow[];
  topExamples: TopExample[];
}

/** A compound's name: its labels joined by " & ". */
export function termName(labels: number[], names: string[]): string {
  return labels.map((l) => names[l]).join(' & ');
}

/** Our formula notation: terms joined by " | ", each term's labels by " & " (& binds tighter). */
export function formula(terms: number[][], names: string[]): string {
  return terms.map((t) => termName(t, names)).join(' | ');
}

function toDrivers(records: DriverRecord[], names: string[]): Pick<RankRow, 'drivers' | 'modulators' | 'nested'> {
  const drivers: RankDriver[] = [];
  const modulators: RankRow['modulators'] = [];
  const nested: RankRow['nested'] = [];
  for (const r of records) {
    if (r.kind === 'driver') {
      drivers.push({
        label: termName(r.labels, names), labels: r.labels.map((l) => names[l]), auroc: r.auroc, q: r.q ?? 1,
        share: r.share ?? 0, shareLow: r.shareLow ?? 0, shareHigh: r.shareHigh ?? 0, effect: r.effect ?? 0, upper: r.upper ?? 0,
        alone: { n: r.nAlone ?? 0, mean: r.meanAlone }, others: { n: r.nOthers ?? 0, mean: r.meanOthers }, none: { n: r.nNone ?? 0, mean: r.meanNone },
        sameAs: r.sameAs.map((ls) => termName(ls, names)),
      });
    } else if (r.kind === 'modulator') {
      modulators.push({ label: termName(r.labels, names), of: termName(r.of ?? [], names), auroc: r.auroc, q: r.q ?? 1, effect: r.effect ?? 0 });
    } else {
      nested.push({ label: termName(r.labels, names), within: termName(r.of ?? [], names), auroc: r.auroc });
    }
  }
  return { drivers, modulators, nested };
}

/** The shuffled-label baseline beside the real count of mixed units, per layer (empty when not computed). */
export function layerNullRows(db: Database.Database): LayerNullRow[] {
  const layers = new Map(readLayers(db).map((l) => [l.id, l]));
  return readLayerNulls(db).map((r) => ({
    layer: layers.get(r.layerId)!.name, units: layers.get(r.layerId)!.units, mixedReal: r.mixedReal, mixedExpected: r.mixedExpected,
    unitsSampled: r.unitsSampled, mixedSampled: r.mixedSampled, mixedAt: r.mixedAt,
  }));
}

const flagWords = (u: { dead: boolean; dense: boolean }): string[] => (u.dead ? ['dead'] : u.dense ? ['dense'] : []);

function toRankRow(s: StoredUnitScore, layerName: string, names: string[], records: DriverRecord[]): RankRow {
  const ex = s.explanation;
  return {
    layer: layerName,
    unit: s.unit,
    conceptCount: s.conceptCount,
    conceptLow: s.conceptLow,
    conceptHigh: s.conceptHigh,
    selectivity: s.selectivity,
    flags: flagWords(s),
    ...toDrivers(records, names),
    explanation: ex && ex.terms ? { formula: formula(ex.terms, names), iou: ex.iou, threshold: ex.threshold, basis: ex.basis } : null,
  };
}

/** Units most polysemantic first (the stored study-wide ranking). */
export function rankRows(db: Database.Database, opts: { layer?: string; top?: number; file?: string } = {}): RankRow[] {
  requireScores(db, opts.file);
  const layers = new Map(readLayers(db).map((l) => [l.id, l.name]));
  const names = labelNames(db);
  const layer = opts.layer ? findLayer(db, opts.layer, opts.file) : null;
  const records = readAllDrivers(db, layer?.id);
  return readUnitScores(db, { layerId: layer?.id, limit: opts.top }).map((s) => toRankRow(s, layers.get(s.layerId)!, names, records.get(`${s.layerId}:${s.unit}`) ?? []));
}

function checkUnit(layer: LayerRow, unit: number, file?: string, where = 'unit'): void {
  if (!Number.isInteger(unit) || unit < 0 || unit >= layer.units) {
    throw new SkeinError({ code: 'request', file, where, message: `Layer ${layer.name} has units 0–${layer.units - 1}; ${unit} is out of range.` });
  }
}

export function unitDetail(db: Database.Database, layerName: string, unit: number, file?: string): UnitDetail {
  requireScores(db, file);
  const binding = requireBinding(db, file);
  const layer = findLayer(db, layerName, file);
  checkUnit(layer, unit, file, `unit ${unit}`);
  const names = labelNames(db);
  const s = readUnitScore(db, layer.id, unit);
  const stats = readLabelStats(db, layer.id, unit).map((st) => ({ ...st, label: names[st.label] }));
  const probes = Array.from(s.topProbes);
  const locations = layer.kind === 'conv' || layer.kind === 'sequence' ? readUnitArgmax(db, binding, layer.id, unit, probes) : probes.map(() => null);
  const topExamples = probes.map((p, i) => {
    const e = readExample(db, p);
    return { probe: p, value: s.topValues[i], location: locations[i], id: e?.id ?? null, text: e?.text ?? null, image: e?.image ?? null };
  });
  return {
    ...toRankRow(s, layer.name, names, readUnitDrivers(db, layer.id, unit)), rank: s.rank, kind: classifyUnit(s, scoreThresholds(db).polysemanticAt), evidence: s.evidence,
    activeFraction: s.activeFraction, mean: s.mean, max: s.max, topThreshold: s.topThreshold, layerKind: layer.kind, layerDims: layer.dims, stats, topExamples,
  };
}

/** Bit flags of UnitTable.flags. */
export const FLAG_DEAD = 1;
export const FLAG_DENSE = 2;

/** The thresholds the stored scores were computed with, for the screens' explanations. */
export interface ScoreThresholds { maxQ: number; minAuroc: number; topQuantile: number; deadFraction: number; denseFraction: number; polysemanticAt: number }

/**
 * Every scored unit as column arrays (one entry per unit, ordered by study rank), so 10^5 units cross the wire
 * without repeating keys. Drivers are CSR: row i's drivers are driverLabel/driverShare[driverOffsets[i] .. driverOffsets[i+1]),
 * largest share first; labels are indices into `labels`, layers indices into `layers`, kinds indices into `kinds`.
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
  /** The concept count's 90% bootstrap interval (the ranking uses the lower end); null where the scores carry none. */
  conceptLow: (number | null)[];
  conceptHigh: (number | null)[];
  selectivity: (number | null)[];
  /** FLAG_DEAD | FLAG_DENSE. */
  flags: number[];
  /** The unit's kind (classified in core/score/kind.ts) as an index into `kinds`. */
  kind: number[];
  kinds: UnitKind[];
  driverOffsets: number[];
  driverLabel: number[];
  driverShare: number[];
  /** Per driver entry: the other labels of a compound driver (all present together), [] for a one-label driver. */
  driverMore: number[][];
  thresholds: ScoreThresholds;
}

function round4(x: number): number | null {
  return Number.isFinite(x) ? Math.round(x * 1e4) / 1e4 : null;
}

/**
 * The thresholds of the stored scores. A study scored before `polysemanticAt` was a stored option was scored with
 * the value that was then fixed in code, the default.
 */
export function scoreThresholds(db: Database.Database): ScoreThresholds {
  const o = readScoreOptions(db) ?? {};
  return {
    maxQ: o.maxQ ?? NaN, minAuroc: o.minAuroc ?? NaN, topQuantile: o.topQuantile ?? NaN,
    deadFraction: o.deadFraction ?? NaN, denseFraction: o.denseFraction ?? NaN, polysemanticAt: o.polysemanticAt ?? defaultScoreOptions.polysemanticAt,
  };
}

export function unitTable(db: Database.Database, file?: string): UnitTable {
  requireScores(db, file);
  const layers = readLayers(db);
  const layerIndex = new Map(layers.map((l, i) => [l.id, i]));
  const thresholds = scoreThresholds(db);
  const kindIndex = new Map(UNIT_KINDS.map((k, i) => [k, i]));
  const t: UnitTable = {
    layers: layers.map((l) => ({ name: l.name, kind: l.kind, units: l.units, dims: l.dims })),
    labels: labelNames(db), count: 0, layer: [], unit: [], rank: [], conceptCount: [], conceptLow: [], conceptHigh: [], selectivity: [], flags: [], kind: [], kinds: [...UNIT_KINDS],
    driverOffsets: [0], driverLabel: [], driverShare: [], driverMore: [], thresholds,
  };
  const intervals = readConceptIntervals(db);
  for (const s of readUnitSummaries(db)) {
    t.layer.push(layerIndex.get(s.layerId)!);
    t.unit.push(s.unit);
    t.rank.push(s.rank);
    t.conceptCount.push(round4(s.conceptCount));
    const ci = intervals.get(`${s.layerId}:${s.unit}`);
    t.conceptLow.push(ci ? round4(ci.low) : null);
    t.conceptHigh.push(ci ? round4(ci.high) : null);
    t.selectivity.push(round4(s.selectivity));
    t.flags.push((s.dead ? FLAG_DEAD : 0) | (s.dense ? FLAG_DENSE : 0));
    t.kind.push(kindIndex.get(classifyUnit(s, thresholds.polysemanticAt))!);
    for (const d of s.drivers) {
      t.driverLabel.push(d.label);
      t.driverShare.push(round4(d.share) ?? 0);
      // The joint model stores a compound driver's labels beside its first one.
      t.driverMore.push(((d as { labels?: number[] }).labels ?? []).filter((l) => l !== d.label));
    }
    t.driverOffsets.push(t.driverLabel.length);
  }
  t.count = t.unit.length;
  return t;
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
  const binding = requireBinding(db, opts.file);
  const layer = findLayer(db, layerName, opts.file);
  checkUnit(layer, unit, opts.file);
  const names = labelNames(db);
  const bins = opts.bins ?? 40;
  const maxLabels = opts.maxLabels ?? 6;
  const driverIds = readUnitScore(db, layer.id, unit).drivers.map((d) => d.label);
  const auroc = new Map(readLabelAurocs(db, layer.id, unit));
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
  const values = readUnit(db, binding, layer.id, unit);
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
  for (const [probe, label] of probesWithLabels(db, chosen)) {
    const s = slot.get(label)!;
    if (binIndex[probe] === FLOOR) atFloor[s]++;
    else counts[s][binIndex[probe]]++;
    n[s]++;
  }
  return {
    layer: layer.name, unit, probes: binding.probeCount, floor: min,
    edges: Array.from({ length: bins + 1 }, (_, i) => (i === bins ? max : min + i * width)),
    all, allAtFloor,
    labels: chosen.map((id, i) => ({ label: names[id], n: n[i], counts: counts[i], atFloor: atFloor[i], auroc: auroc.get(id) ?? NaN, isDriver: driverIds.includes(id) })),
  };
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
  const binding = requireBinding(db, opts.file);
  const layer = findLayer(db, layerName, opts.file);
  checkUnit(layer, unit, opts.file);
  const top = opts.top ?? 12;
  const sampleProbes = opts.sampleProbes ?? 4096;
  const chunkCount = Math.ceil(binding.probeCount / binding.chunkSize);
  const chunks = sampleChunks(chunkCount, Math.ceil(sampleProbes / binding.chunkSize));
  const lengths = chunks.map((c) => Math.min(binding.chunkSize, binding.probeCount - c * binding.chunkSize));
  const inChunks = lengths.reduce((a, b) => a + b, 0);
  const stride = Math.max(1, Math.ceil(inChunks / sampleProbes));
  const n = Math.ceil(inChunks / stride);

  // Concatenates the chunks of one unit and keeps every stride-th probe.
  const gather = (parts: Map<number, Float32Array>, out: Float32Array): number => {
    let k = 0;
    let pos = 0;
    let sum = 0;
    for (const c of chunks) {
      const v = parts.get(c)!;
      for (let i = 0; i < v.length; i++, pos++) {
        if (pos % stride === 0) { out[k++] = v[i]; sum += v[i]; }
      }
    }
    return sum / n;
  };
  const target = new Float32Array(n);
  const targetParts = new Map<number, Float32Array>();
  for (const { chunk, values } of readChunkSample(db, layer.id, chunks, unit)) targetParts.set(chunk, values);
  if (targetParts.size !== chunks.length) throw new SkeinError({ code: 'study', file: opts.file, where: `layer ${layer.name}`, message: 'The scan of this layer is incomplete. Run the scan again to finish it.' });
  const targetMean = gather(targetParts, target);
  let constant = true;
  for (let i = 1; i < n; i++) if (target[i] !== target[0]) { constant = false; break; }

  const found: { unit: number; r: number }[] = [];
  if (!constant) {
    const other = new Float32Array(n);
    let current = -1;
    let parts = new Map<number, Float32Array>();
    const flush = () => {
      if (current < 0 || current === unit || parts.size !== chunks.length) return;
      const r = pearson(target, targetMean, other, gather(parts, other), n);
      if (Number.isFinite(r)) found.push({ unit: current, r });
    };
    for (const { unit: u, chunk, values } of readChunkSample(db, layer.id, chunks)) {
      if (u !== current) { flush(); current = u; parts = new Map(); }
      parts.set(chunk, values);
    }
    flush();
  }
  found.sort((a, b) => b.r - a.r || a.unit - b.unit);
  const names = labelNames(db);
  return {
    layer: layer.name, unit, sample: n, probes: binding.probeCount, constant,
    units: found.slice(0, top).map(({ unit: u, r }) => {
      const s = readUnitSummary(db, layer.id, u)!;
      return { unit: u, r, conceptCount: s.conceptCount, drivers: s.drivers.slice(0, 3).map((d) => names[d.label]) };
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
  const drivers: ConceptReachRow[] = readUnitsDrivenBy(db, id).map((s) => {
    const mine = s.drivers.find((d) => d.label === id)!;
    return {
      layer: layers.get(s.layerId)!, unit: s.unit, auroc: s.auroc, q: s.q, share: mine.share, onlyDriver: s.drivers.length === 1, driverCount: s.drivers.length,
      conceptCount: s.conceptCount, otherDrivers: s.drivers.filter((d) => d.label !== id).map((d) => names[d.label]),
    };
  });
  drivers.sort((a, b) => b.share - a.share || b.auroc - a.auroc);
  const driverKeys = new Set(drivers.map((d) => `${d.layer}\u0000${d.unit}`));
  const nearMisses: ConceptReach['nearMisses'] = [];
  const aurocHistogram = new Array(20).fill(0);
  for (const { layerId, unit, auroc, q, topHits } of unitsByAuroc(db, id)) {
    if (nearMisses.length < 20 && !driverKeys.has(`${layers.get(layerId)}\u0000${unit}`)) nearMisses.push({ layer: layers.get(layerId)!, unit, auroc, q, topHits });
    if (Number.isFinite(auroc)) aurocHistogram[binOf(auroc, 0, 0.05, 20)]++;
  }
  return {
    label: labelName, probes: probeCountOfLabel(db, id), totalUnits: scoredUnitCount(db),
    drivers: drivers.slice(0, top), driverOf: drivers.length, onlyDriverOf: drivers.filter((d) => d.onlyDriver).length,
    nearMisses, aurocHistogram,
  };
}

export interface LayerStrataRow {
  name: string; op: string; kind: LayerRow['kind']; units: number;
  dead: number; dense: number;
  /** Not dead or dense and no label passes the driver test. */
  undriven: number;
  /** Concept count in (0, polysemanticAt). */
  single: number;
  /** Concept count ≥ polysemanticAt. */
  mixed: number;
  meanConceptCount: number | null;
  maxConceptCount: number;
  /** Units per concept-count bin (edges in LayerStrata.edges). */
  histogram: number[];
  /**
   * The shuffled-label baseline: `unitsSampled` units scored again with the probe labels shuffled, of which
   * `mixedSampled` came out mixed; `mixedExpected` scales that to the layer. null when the scores carry none.
   */
  baseline: { unitsSampled: number; mixedSampled: number; mixedExpected: number } | null;
}

export interface LayerStrata { polysemanticAt: number; edges: number[]; layers: LayerStrataRow[]; thresholds: ScoreThresholds }

/** Per layer: how concept counts spread and how many units are of each kind (core/score/kind.ts). */
export function layerStrata(db: Database.Database, file?: string): LayerStrata {
  requireScores(db, file);
  const layers = readLayers(db);
  const thresholds = scoreThresholds(db);
  const rows = [...readUnitSummaries(db)];
  let globalMax = 0;
  for (const s of rows) if (s.conceptCount > globalMax) globalMax = s.conceptCount;
  const width = 0.25;
  const bins = Math.max(8, Math.ceil(globalMax / width));
  const byLayer = new Map(layers.map((l) => [l.id, {
    name: l.name, op: l.op, kind: l.kind, units: l.units, dead: 0, dense: 0, undriven: 0, single: 0, mixed: 0,
    meanConceptCount: null as number | null, maxConceptCount: 0, histogram: new Array(bins).fill(0), sum: 0, driven: 0,
  }]));
  for (const u of rows) {
    const s = byLayer.get(u.layerId)!;
    s[classifyUnit(u, thresholds.polysemanticAt)]++;
    const cc = u.conceptCount;
    if (cc > 0) { s.sum += cc; s.driven++; }
    if (cc > s.maxConceptCount) s.maxConceptCount = cc;
    s.histogram[binOf(cc, 0, width, bins)]++;
  }
  const baselines = new Map(readLayerNulls(db).map((b) => [b.layerId, { unitsSampled: b.unitsSampled, mixedSampled: b.mixedSampled, mixedExpected: b.mixedExpected }]));
  return {
    polysemanticAt: thresholds.polysemanticAt, thresholds,
    edges: Array.from({ length: bins + 1 }, (_, i) => i * width),
    layers: [...byLayer.entries()].map(([layerId, { sum, driven, ...s }]) => ({ ...s, meanConceptCount: driven ? sum / driven : null, baseline: baselines.get(layerId) ?? null })),
  };
}

/** The image of one probe as a data: URL, read from the probe-set folder; refuses any path leaving that folder. */
export function exampleImage(db: Database.Database, probe: number, file?: string, roots?: string[]): { dataUrl: string; mime: string; bytes: number } {
  const binding = requireBinding(db, file);
  checkStoredPath(binding.probesDir, 'probe-set folder', file ?? '', roots);
  const image = readExample(db, probe)?.image;
  if (!image) throw new SkeinError({ code: 'request', file, where: 'probe', message: `Probe ${probe} has no image in this study's examples.` });
  return readExampleImage(binding.probesDir, image, probe);
}

/** Label names of each given probe (in the given order). */
export function probeLabels(db: Database.Database, probes: number[]): string[][] {
  const names = labelNames(db);
  return labelsOfProbes(db, probes).map((ls) => ls.map((l) => names[l]));
}

