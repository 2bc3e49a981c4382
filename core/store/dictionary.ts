/**
 * The dictionary table: one sparse dictionary per layer (core/dictionary) — its training checkpoint while it trains,
 * then the finished dictionary and its metrics. The only code that reads or writes it.
 */
import type Database from 'better-sqlite3';
import { blobToFloats, floatsToBlob, now } from './study.ts';

export interface DictionaryWeights { units: number; features: number; k: number; wEnc: Float32Array; bEnc: Float32Array; wDec: Float32Array; bDec: Float32Array }

export interface StoredDictionary {
  key: string;
  state: 'training' | 'done';
  epoch: number;
  options: Record<string, unknown>;
  scale: number;
  weights: DictionaryWeights;
  adam: { step: number; m: Float32Array[]; v: Float32Array[] } | null;
  sinceFired: Float64Array | null;
  losses: number[];
  metrics: Record<string, unknown> | null;
  firingRate: Float32Array | null;
  updatedAt: string;
}

function cat(parts: Float32Array[]): Float32Array {
  const out = new Float32Array(parts.reduce((s, p) => s + p.length, 0));
  let o = 0;
  for (const p of parts) { out.set(p, o); o += p.length; }
  return out;
}

function split(all: Float32Array, sizes: number[]): Float32Array[] {
  let o = 0;
  return sizes.map((n) => all.slice(o, (o += n)));
}

export function readDictionary(db: Database.Database, layerId: number): StoredDictionary | null {
  const r = db.prepare(`SELECT * FROM dictionary WHERE layer_id = ?`).get(layerId) as Record<string, unknown> | undefined;
  if (!r) return null;
  const units = r.units as number, features = r.features as number;
  const sizes = [features * units, features, features * units, units];
  const adamAll = r.adam ? blobToFloats(r.adam as Buffer) : null;
  const sf = r.since_fired as Buffer | null;
  return {
    key: r.key as string,
    state: r.state as 'training' | 'done',
    epoch: r.epoch as number,
    options: JSON.parse(r.options_json as string),
    scale: r.scale as number,
    weights: {
      units, features, k: r.k as number,
      wEnc: blobToFloats(r.w_enc as Buffer), bEnc: blobToFloats(r.b_enc as Buffer), wDec: blobToFloats(r.w_dec as Buffer), bDec: blobToFloats(r.b_dec as Buffer),
    },
    adam: adamAll ? { step: r.adam_step as number, m: split(adamAll.subarray(0, adamAll.length / 2), sizes), v: split(adamAll.subarray(adamAll.length / 2), sizes) } : null,
    sinceFired: sf ? new Float64Array(new Uint8Array(sf).buffer.slice(0)) : null,
    losses: JSON.parse(r.losses_json as string),
    metrics: r.metrics_json ? JSON.parse(r.metrics_json as string) : null,
    firingRate: r.firing_rate ? blobToFloats(r.firing_rate as Buffer) : null,
    updatedAt: r.updated_at as string,
  };
}

/** Replaces the layer's dictionary row in one statement (a crash leaves the previous checkpoint or the new one). */
export function writeDictionary(db: Database.Database, layerId: number, d: Omit<StoredDictionary, 'updatedAt'>): void {
  const w = d.weights;
  const sf = d.sinceFired ? Buffer.from(d.sinceFired.buffer, d.sinceFired.byteOffset, d.sinceFired.byteLength) : null;
  db.prepare(`INSERT OR REPLACE INTO dictionary (layer_id, key, state, epoch, options_json, units, features, k, scale, w_enc, b_enc, w_dec, b_dec,
              adam_step, adam, since_fired, losses_json, metrics_json, firing_rate, updated_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`)
    .run(layerId, d.key, d.state, d.epoch, JSON.stringify(d.options), w.units, w.features, w.k, d.scale,
      floatsToBlob(w.wEnc), floatsToBlob(w.bEnc), floatsToBlob(w.wDec), floatsToBlob(w.bDec),
      d.adam?.step ?? 0, d.adam ? floatsToBlob(cat([...d.adam.m, ...d.adam.v])) : null, sf,
      JSON.stringify(d.losses), d.metrics ? JSON.stringify(d.metrics) : null, d.firingRate ? floatsToBlob(d.firingRate) : null, now());
}
