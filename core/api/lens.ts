/**
 * Requests of the superposition lens (core/geometry): the cached result of a layer, a long-running job that
 * computes it with progress and cancel, a unit's loadings, and exports of every figure.
 */
import fs from 'node:fs';
import path from 'node:path';
import crypto from 'node:crypto';
import type { z } from 'zod';
import type { lensRequests } from './requests/lens.ts';
import { stringify } from 'csv-stringify/sync';
import { SkeinError, isSkeinError, type ErrorInfo } from '../errors.ts';
import type { ProgressReport } from '../extract/progress.ts';
import { openStudyDb, withStudyDb } from '../store/study.ts';
import { lockStudy } from '../store/lock.ts';
import { findLayer } from '../store/binding.ts';
import { writeFileDurably } from '../fs/index.ts';
import { writeNpyFloat32 } from '../probes/index.ts';
import { cachedLens, layerLens, unitLoadings, type LayerLens, type LensResult } from '../geometry/index.ts';
import type { ApiContext } from './context.ts';

type Req<K extends keyof typeof lensRequests> = z.infer<(typeof lensRequests)[K]>;

export type LensView = { state: 'ready'; result: LensResult; reused: boolean } | { state: 'missing'; layer: string; units: number };

export interface LensJobState {
  job: string;
  state: 'running' | 'done' | 'failed' | 'cancelled';
  progress: ProgressReport | null;
  error: ErrorInfo | null;
  result: LensResult | null;
}

export interface UnitLoadings {
  layer: string;
  unit: number;
  /** false when the layer's lens has not been computed (or is stale): run it first. */
  computed: boolean;
  loadings: { concept: string; loading: number; auroc: number | null }[];
  caution: string;
}

export interface LensExport { files: string[] }

/** The lens's figures as files: summary.json, concepts.csv, cosine.csv, localisation.csv, projection.csv, directions.npy. */
export function exportLens(lens: LayerLens, dir: string): string[] {
  const r = lens.result;
  const abs = path.resolve(dir);
  if (fs.existsSync(abs) && !fs.statSync(abs).isDirectory()) {
    throw new SkeinError({ code: 'request', file: abs, message: 'The lens exports several files: give a folder name, not a file.' });
  }
  fs.mkdirSync(abs, { recursive: true });
  const base = r.layer.replace(/[^A-Za-z0-9._-]+/g, '_');
  const file = (name: string) => path.join(abs, `${base}.${name}`);
  const files: string[] = [];
  const put = (name: string, text: string) => { writeFileDurably(file(name), text); files.push(file(name)); };
  put('lens.json', JSON.stringify(r, null, 1) + '\n');
  put('concepts.csv', stringify(r.concepts.map((c, i) => [i, c.name, c.kind, c.positives, c.norm, c.auroc ?? '', c.carried, c.decodable, c.dimensionality, c.interference, c.k95 ?? '', c.locality]),
    { header: true, columns: ['row', 'concept', 'kind', 'positives', 'norm', 'probe_auroc', 'carried', 'decodable', 'dimensionality', 'interference', 'k95', 'locality'] }));
  const carried = r.carriedOrder.map((t) => r.concepts[t].name);
  put('cosine.csv', stringify(r.cosine.map((row, i) => [carried[i], ...row]), { header: true, columns: ['concept', ...carried] }));
  put('localisation.csv', stringify(r.concepts.flatMap((c) => c.curve.map((p) => [c.name, p.k, p.auroc ?? ''])), { header: true, columns: ['concept', 'k', 'auroc'] }));
  put('projection.csv', stringify(carried.map((name, i) => [name, r.projection.x[i], r.projection.y[i]]), { header: true, columns: ['concept', 'x', 'y'] }));
  put('summary.csv', stringify([[r.layer, r.units, r.probes, r.probesFitted, r.effectiveDimensions, r.decodableCount, r.conceptsPerDimension, r.dimensionalitySum, r.projection.kept, r.summary, r.caution]],
    { header: true, columns: ['layer', 'units', 'probes', 'probes_fitted', 'effective_dimensions', 'decodable', 'concepts_per_dimension', 'dimensionality_sum', 'projection_kept', 'summary', 'caution'] }));
  // Rows follow concepts.csv's `row` column; float32 [concepts × units].
  writeNpyFloat32(file('directions.npy'), [r.concepts.length, r.units], lens.directions);
  files.push(file('directions.npy'));
  return files;
}

export function createLensApi(ctx: ApiContext) {
  const jobs = new Map<string, { state: LensJobState; abort: AbortController }>();
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);
  const requireCached = (db: ReturnType<typeof openStudyDb>, r: { study: string; layer: string }): LayerLens => {
    const hit = cachedLens(db, r.layer, {}, r.study);
    if (!hit) throw new SkeinError({ code: 'study', file: r.study, where: `layer ${r.layer}`, message: `The lens of layer ${r.layer} has not been computed for the study's current scan. Run skein lens first (or open the Lens view).` });
    return hit;
  };
  return {
    'lens.get': async (r: Req<'lens.get'>): Promise<LensView> => withStudy(r.study, (db) => {
      const hit = cachedLens(db, r.layer, {}, r.study);
      if (hit) return { state: 'ready', result: hit.result, reused: true };
      const layer = findLayer(db, r.layer, r.study);
      return { state: 'missing', layer: layer.name, units: layer.units };
    }),

    'lens.start': async (r: Req<'lens.start'>): Promise<{ job: string }> => {
      // Fail fast on a bad study or layer, before a job exists.
      withStudy(r.study, (db) => findLayer(db, r.layer, r.study));
      const lock = lockStudy(r.study, 'lens');
      const id = crypto.randomUUID();
      const abort = new AbortController();
      const state: LensJobState = { job: id, state: 'running', progress: null, error: null, result: null };
      jobs.set(id, { state, abort });
      let db: ReturnType<typeof openStudyDb>;
      try {
        db = openStudyDb(r.study, { nativeBinding: ctx.nativeBinding });
      } catch (e) {
        lock.release();
        throw e;
      }
      layerLens(db, r.layer, {}, { signal: abort.signal, onProgress: (p) => { state.progress = p; } }, r.study)
        .then((out) => { state.result = out.result; state.state = 'done'; })
        .catch((e) => { state.error = isSkeinError(e) ? e.toJSON() : { code: 'io', message: `Unexpected failure: ${(e as Error)?.message ?? String(e)}.` }; state.state = isSkeinError(e) && e.code === 'cancelled' ? 'cancelled' : 'failed'; })
        .finally(() => { db.close(); lock.release(); });
      return { job: id };
    },

    'lens.job': async (r: Req<'lens.job'>): Promise<LensJobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No lens job ${r.job}; it may belong to an earlier session. Start the lens again.` });
      return j.state;
    },

    'lens.cancel': async (r: Req<'lens.cancel'>): Promise<LensJobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No lens job ${r.job}.` });
      j.abort.abort();
      return j.state;
    },

    'lens.unit': async (r: Req<'lens.unit'>): Promise<UnitLoadings> => withStudy(r.study, (db) => {
      const layer = findLayer(db, r.layer, r.study);
      if (r.unit >= layer.units) throw new SkeinError({ code: 'request', file: r.study, where: `unit ${r.unit}`, message: `Layer ${layer.name} has units 0–${layer.units - 1}; ${r.unit} is out of range.` });
      const hit = cachedLens(db, r.layer, {}, r.study);
      const caution = 'Loadings are hypotheses about the model on this probe set, not proof.';
      if (!hit) return { layer: layer.name, unit: r.unit, computed: false, loadings: [], caution };
      return { layer: layer.name, unit: r.unit, computed: true, loadings: unitLoadings(hit.result, hit.directions, r.unit), caution };
    }),

    'lens.export': async (r: Req<'lens.export'>): Promise<LensExport> => withStudy(r.study, (db) => ({ files: exportLens(requireCached(db, r), r.out) })),
  };
}

export type { LensResult, LensConcept } from '../geometry/lens.ts';
