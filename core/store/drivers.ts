/**
 * Repository of the joint driver model's stored results: the normalised driver table (`unit_driver`) and the
 * shuffled-label baseline per layer (`layer_null`). The only SQL for them.
 */
import type Database from 'better-sqlite3';

/** One stored row of a unit's joint model, with label ids (the reader maps them to names). */
export interface DriverRecord {
  kind: 'driver' | 'modulator' | 'nested';
  labels: number[];
  of: number[] | null;
  share: number | null; shareLow: number | null; shareHigh: number | null;
  auroc: number;
  q: number | null;
  effect: number | null;
  upper: number | null;
  nAlone: number | null; meanAlone: number | null;
  nOthers: number | null; meanOthers: number | null;
  nNone: number | null; meanNone: number | null;
  sameAs: number[][];
}

export interface LayerNullRecord {
  layerId: number; unitsSampled: number; mixedSampled: number; mixedExpected: number; mixedReal: number; mixedAt: number; seed: number;
}

const nullIfNaN = (x: number | null | undefined) => (x === null || x === undefined || Number.isNaN(x) ? null : x);

export function clearDriverTables(db: Database.Database): void {
  db.prepare(`DELETE FROM unit_driver`).run();
  db.prepare(`DELETE FROM layer_null`).run();
}

/** Writes one unit's rows in the order given (the caller runs this inside its transaction). */
export function writeUnitDrivers(db: Database.Database, layerId: number, unit: number, rows: DriverRecord[]): void {
  const ins = db.prepare(`INSERT INTO unit_driver (layer_id, unit, position, kind, labels, of_labels, share, share_low, share_high,
    auroc, q, effect, upper, n_alone, mean_alone, n_others, mean_others, n_none, mean_none, same_as)
    VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
  rows.forEach((r, position) => ins.run(layerId, unit, position, r.kind, JSON.stringify(r.labels), r.of ? JSON.stringify(r.of) : null,
    nullIfNaN(r.share), nullIfNaN(r.shareLow), nullIfNaN(r.shareHigh), r.auroc, nullIfNaN(r.q), nullIfNaN(r.effect), nullIfNaN(r.upper),
    r.nAlone, nullIfNaN(r.meanAlone), r.nOthers, nullIfNaN(r.meanOthers), r.nNone, nullIfNaN(r.meanNone), JSON.stringify(r.sameAs)));
}

interface RawDriver {
  layer_id: number; unit: number; position: number; kind: DriverRecord['kind']; labels: string; of_labels: string | null;
  share: number | null; share_low: number | null; share_high: number | null; auroc: number; q: number | null; effect: number | null;
  upper: number | null; n_alone: number | null; mean_alone: number | null; n_others: number | null; mean_others: number | null;
  n_none: number | null; mean_none: number | null; same_as: string | null;
}

function toRecord(r: RawDriver): DriverRecord {
  return {
    kind: r.kind, labels: JSON.parse(r.labels), of: r.of_labels ? JSON.parse(r.of_labels) : null,
    share: r.share, shareLow: r.share_low, shareHigh: r.share_high, auroc: r.auroc, q: r.q, effect: r.effect, upper: r.upper,
    nAlone: r.n_alone, meanAlone: r.mean_alone, nOthers: r.n_others, meanOthers: r.mean_others, nNone: r.n_none, meanNone: r.mean_none,
    sameAs: r.same_as ? JSON.parse(r.same_as) : [],
  };
}

/** One unit's rows, in stored order. */
export function readUnitDrivers(db: Database.Database, layerId: number, unit: number): DriverRecord[] {
  return (db.prepare(`SELECT * FROM unit_driver WHERE layer_id = ? AND unit = ? ORDER BY position`).all(layerId, unit) as RawDriver[]).map(toRecord);
}

/** Every unit's rows (of one layer, or all), keyed `${layerId}:${unit}`. */
export function readAllDrivers(db: Database.Database, layerId?: number): Map<string, DriverRecord[]> {
  const rows = (layerId === undefined
    ? db.prepare(`SELECT * FROM unit_driver ORDER BY layer_id, unit, position`).all()
    : db.prepare(`SELECT * FROM unit_driver WHERE layer_id = ? ORDER BY unit, position`).all(layerId)) as RawDriver[];
  const out = new Map<string, DriverRecord[]>();
  for (const r of rows) {
    const key = `${r.layer_id}:${r.unit}`;
    let list = out.get(key);
    if (!list) out.set(key, (list = []));
    list.push(toRecord(r));
  }
  return out;
}

export function writeLayerNull(db: Database.Database, r: LayerNullRecord): void {
  db.prepare(`INSERT INTO layer_null (layer_id, units_sampled, mixed_sampled, mixed_expected, mixed_real, mixed_at, seed) VALUES (?, ?, ?, ?, ?, ?, ?)`)
    .run(r.layerId, r.unitsSampled, r.mixedSampled, r.mixedExpected, r.mixedReal, r.mixedAt, r.seed);
}

export function readLayerNulls(db: Database.Database): LayerNullRecord[] {
  return (db.prepare(`SELECT * FROM layer_null ORDER BY layer_id`).all() as Record<string, number>[]).map((r) => ({
    layerId: r.layer_id, unitsSampled: r.units_sampled, mixedSampled: r.mixed_sampled, mixedExpected: r.mixed_expected,
    mixedReal: r.mixed_real, mixedAt: r.mixed_at, seed: r.seed,
  }));
}
