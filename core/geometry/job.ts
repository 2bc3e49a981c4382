/** The lens as a study job: reuse the cached result while its inputs are unchanged, else compute and store it. */
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { readBinding as readRun, findLayer } from '../store/binding.ts';
import { readLens, writeLens } from '../store/geometry.ts';
import { computeLens, defaultLensOptions, lensKey, type ExtraConcept, type LensHooks, type LensOptions, type LensResult } from './lens.ts';

export interface LayerLens { result: LensResult; directions: Float32Array; reused: boolean }

/**
 * Compound concepts (the driver model's `a & b`) join the plain labels here once core/score stores them; until
 * then the lens works on the labels alone.
 */
export function extraConcepts(_db: Database.Database): ExtraConcept[] {
  return [];
}

/** The cached lens of a layer when it is still valid for the study's current inputs, else null. */
export function cachedLens(db: Database.Database, layerName: string, options: Partial<LensOptions> = {}, file?: string): LayerLens | null {
  const run = readRun(db);
  if (!run) throw new SkeinError({ code: 'study', file, message: 'This study has no scan yet. Run skein scan first.' });
  const layer = findLayer(db, layerName, file);
  const stored = readLens<LensResult>(db, layer.id);
  const key = lensKey(run, layer, { ...defaultLensOptions, ...options }, extraConcepts(db));
  return stored && stored.key === key ? { result: stored.result, directions: stored.directions, reused: true } : null;
}

export async function layerLens(db: Database.Database, layerName: string, options: Partial<LensOptions> = {}, hooks: LensHooks = {}, file?: string): Promise<LayerLens> {
  const hit = cachedLens(db, layerName, options, file);
  if (hit) return hit;
  const run = readRun(db)!;
  const layer = findLayer(db, layerName, file);
  const opts = { ...defaultLensOptions, ...options };
  const extras = extraConcepts(db);
  const out = await computeLens(db, layer.name, opts, hooks, extras);
  writeLens(db, layer.id, lensKey(run, layer, opts, extras), out.result, out.directions);
  return { ...out, reused: false };
}
