/** The lens as a study job: reuse the cached result while its inputs are unchanged, else compute and store it. */
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readBinding as readRun, findLayer } from '../store/binding.ts';
import { readLens, writeLens } from '../store/geometry.ts';
import { readAllDrivers } from '../store/drivers.ts';
import { labelNames, readProbeLabels } from '../store/binding.ts';
import { computeLens, defaultLensOptions, lensKey, type ExtraConcept, type LensHooks, type LensOptions, type LensResult } from './lens.ts';

export interface LayerLens { result: LensResult; directions: Float32Array; reused: boolean }

/**
 * Compound drivers of the layer's units (the joint driver model's `a & b`: all labels present together) as extra
 * binary concepts, so each gets a direction, a probe and a place in the interference matrix like a plain label.
 */
export function extraConcepts(db: Database.Database, layerId: number, probeCount: number): ExtraConcept[] {
  const sets = new Map<string, number[]>();
  for (const rows of readAllDrivers(db, layerId).values()) {
    for (const d of rows) {
      if (d.kind !== 'driver' || d.labels.length < 2) continue;
      const ids = [...d.labels].sort((a, b) => a - b);
      sets.set(ids.join(','), ids);
    }
  }
  if (sets.size === 0) return [];
  const names = labelNames(db);
  const { labelOffsets, labelIds } = readProbeLabels(db, probeCount);
  return [...sets.values()].sort((a, b) => a.join(',').localeCompare(b.join(','))).map((ids) => {
    const positive = new Uint8Array(probeCount);
    for (let p = 0; p < probeCount; p++) {
      const has = labelIds.subarray(labelOffsets[p], labelOffsets[p + 1]);
      positive[p] = ids.every((id) => has.includes(id)) ? 1 : 0;
    }
    return { name: ids.map((id) => names[id]).join(' & '), kind: 'compound' as const, positive };
  });
}

/** The cached lens of a layer when it is still valid for the study's current inputs, else null. */
export function cachedLens(db: Database.Database, layerName: string, options: Partial<LensOptions> = {}, file?: string): LayerLens | null {
  const run = readRun(db);
  if (!run) throw new SkeinError({ code: 'study', file, message: 'This study has no scan yet. Run skein scan first.' });
  const layer = findLayer(db, layerName, file);
  const stored = readLens<LensResult>(db, layer.id);
  const key = lensKey(run, layer, { ...defaultLensOptions, ...options }, extraConcepts(db, layer.id, run.probeCount));
  return stored && stored.key === key ? { result: stored.result, directions: stored.directions, reused: true } : null;
}

export async function layerLens(db: Database.Database, layerName: string, options: Partial<LensOptions> = {}, hooks: LensHooks = {}, file?: string): Promise<LayerLens> {
  const hit = cachedLens(db, layerName, options, file);
  if (hit) return hit;
  const run = readRun(db)!;
  const layer = findLayer(db, layerName, file);
  const opts = { ...defaultLensOptions, ...options };
  const extras = extraConcepts(db, layer.id, run.probeCount);
  const out = await computeLens(db, layer.name, opts, hooks, extras);
  writeLens(db, layer.id, lensKey(run, layer, opts, extras), out.result, out.directions);
  return { ...out, reused: false };
}
