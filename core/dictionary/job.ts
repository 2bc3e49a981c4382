/**
 * A dictionary as a study job: train on a layer's cached chunks (out of core), checkpoint every epoch into the
 * study, resume from the last saved epoch, reuse a finished dictionary while its inputs are unchanged.
 */
import crypto from 'node:crypto';
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { requireBinding, findLayer, type LayerRow, type StudyBinding } from '../store/binding.ts';
import { doneChunks, readLayerChunk } from '../store/activations.ts';
import { readDictionary, writeDictionary, type StoredDictionary } from '../store/dictionary.ts';
import { createOrtEncoder } from './encoder.ts';
import { defaultDictionaryOptions, measureDictionary, toStoredSae, trainDictionary, type ChunkSource, type DictionaryOptions, type LayerMetrics, type TrainHooks, type TrainState } from './train.ts';
import type { Sae } from './sae.ts';

/** Bumped when training changes what a stored dictionary means. */
const DICTIONARY_VERSION = 1;

export function dictionaryKey(run: StudyBinding, layer: LayerRow, o: DictionaryOptions): string {
  return crypto.createHash('sha256').update(JSON.stringify({ v: DICTIONARY_VERSION, m: run.modelFp, p: run.probesFp, l: [layer.name, layer.units, layer.pool, layer.kind], o })).digest('hex');
}

/** A layer's cached chunks, transposed to probe-major; fails clearly when the scan of the layer is incomplete. */
export function layerSource(db: Database.Database, run: StudyBinding, layer: LayerRow, file?: string): ChunkSource {
  const chunks = Math.ceil(run.probeCount / run.chunkSize);
  const done = doneChunks(db, layer.id);
  if (done.size < chunks) {
    throw new SkeinError({ code: 'study', file, where: `layer ${layer.name}`, message: `The scan of this layer is incomplete (${done.size} of ${chunks} chunks). Resume the scan first.` });
  }
  return {
    probes: run.probeCount, units: layer.units, chunks,
    readChunk(c) {
      const cols = readLayerChunk(db, layer.id, c);
      const n = cols[0].length;
      const d = cols.length;
      const x = new Float32Array(n * d);
      for (let u = 0; u < d; u++) { const col = cols[u]; for (let b = 0; b < n; b++) x[b * d + u] = col[b]; }
      return x;
    },
  };
}

export interface LayerDictionary { layer: string; options: DictionaryOptions; sae: Sae; metrics: Omit<LayerMetrics, 'firingRate'>; firingRate: Float32Array; losses: number[]; reused: boolean; resumedFromEpoch: number }

function finished(layer: string, s: StoredDictionary, reused: boolean, resumedFromEpoch: number): LayerDictionary {
  return { layer, options: s.options as unknown as DictionaryOptions, sae: s.weights, metrics: s.metrics as unknown as LayerDictionary['metrics'], firingRate: s.firingRate!, losses: s.losses, reused, resumedFromEpoch };
}

/** The finished dictionary of a layer when still valid for these options, else null. */
export function cachedDictionary(db: Database.Database, layerName: string, options: Partial<DictionaryOptions> = {}, file?: string): LayerDictionary | null {
  const run = requireBinding(db, file);
  const layer = findLayer(db, layerName, file);
  const s = readDictionary(db, layer.id);
  const key = dictionaryKey(run, layer, { ...defaultDictionaryOptions, ...options });
  return s && s.state === 'done' && s.key === key ? finished(layer.name, s, true, s.epoch) : null;
}

/** The stored dictionary of a layer, whatever options it was trained with (null when none is finished). */
export function storedDictionary(db: Database.Database, layerName: string, file?: string): LayerDictionary | null {
  requireBinding(db, file);
  const layer = findLayer(db, layerName, file);
  const s = readDictionary(db, layer.id);
  return s && s.state === 'done' ? finished(layer.name, s, true, s.epoch) : null;
}

export async function layerDictionary(db: Database.Database, layerName: string, options: Partial<DictionaryOptions> = {}, hooks: Omit<TrainHooks, 'resume' | 'onEpoch'> & { threads?: number } = {}, file?: string): Promise<LayerDictionary> {
  const hit = cachedDictionary(db, layerName, options, file);
  if (hit) return hit;
  const run = requireBinding(db, file);
  const layer = findLayer(db, layerName, file);
  const o = { ...defaultDictionaryOptions, ...options };
  const key = dictionaryKey(run, layer, o);
  const src = layerSource(db, run, layer, file);
  const prior = readDictionary(db, layer.id);
  let resume: TrainState | null = null;
  if (prior && prior.state === 'training' && prior.key === key && prior.adam && prior.sinceFired) {
    resume = { sae: prior.weights, adam: prior.adam, scale: prior.scale, epoch: prior.epoch, sinceFired: prior.sinceFired, losses: prior.losses };
  }
  const resumedFromEpoch = resume?.epoch ?? 0;
  const encoder = await createOrtEncoder(hooks.threads);
  try {
    const save = (st: TrainState) => writeDictionary(db, layer.id, {
      key, state: 'training', epoch: st.epoch, options: { ...o }, scale: st.scale, weights: st.sae, adam: st.adam,
      sinceFired: st.sinceFired, losses: st.losses, metrics: null, firingRate: null,
    });
    const state = await trainDictionary(src, o, encoder, { ...hooks, resume, onEpoch: save });
    const sae = toStoredSae(state);
    const { firingRate, ...metrics } = await measureDictionary(src, sae, encoder);
    const done: Omit<StoredDictionary, 'updatedAt'> = { key, state: 'done', epoch: state.epoch, options: { ...o }, scale: 1, weights: sae, adam: null, sinceFired: null, losses: state.losses, metrics, firingRate };
    writeDictionary(db, layer.id, done);
    return finished(layer.name, { ...done, updatedAt: '' }, false, resumedFromEpoch);
  } finally {
    await encoder.release();
  }
}
