/** The lens table: one cached superposition-lens result per layer (core/geometry), keyed on its inputs. */
import type Database from 'better-sqlite3';
import { blobToFloats, floatsToBlob, now } from './study.ts';

export interface StoredLens<R> { key: string; result: R; directions: Float32Array; computedAt: string }

export function readLens<R>(db: Database.Database, layerId: number): StoredLens<R> | null {
  const row = db.prepare(`SELECT key, result_json, directions, computed_at FROM lens WHERE layer_id = ?`).get(layerId) as
    { key: string; result_json: string; directions: Buffer; computed_at: string } | undefined;
  if (!row) return null;
  return { key: row.key, result: JSON.parse(row.result_json) as R, directions: blobToFloats(row.directions), computedAt: row.computed_at };
}

/** Replaces the layer's cached lens in one transaction (a crash leaves the old one or the new one, never half). */
export function writeLens(db: Database.Database, layerId: number, key: string, result: unknown, directions: Float32Array): void {
  db.prepare(`INSERT OR REPLACE INTO lens (layer_id, key, result_json, directions, computed_at) VALUES (?, ?, ?, ?, ?)`)
    .run(layerId, key, JSON.stringify(result), floatsToBlob(directions), now());
}
