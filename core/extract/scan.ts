import fs from 'node:fs';
import path from 'node:path';
import type Database from 'better-sqlite3';
import * as ort from 'onnxruntime-node';
import { SkeinError } from '../errors.ts';
import { readModel, exposeTensors, createSession, unitLayout, batchPolicy, dryRunShapes } from '../model/index.ts';
import { canPoolInGraph, exposePooled, type PooledOutputs } from '../model/pool-graph.ts';
import type { ModelInfo, ValueInfo } from '../model/types.ts';
import { openProbeSet, resolveFillShapes, float16BitsToNumber } from '../probes/index.ts';
import type { ProbeSet } from '../probes/types.ts';
import { openStudyDb } from '../store/study.ts';
import { readBinding, bindStudy, updateBindingPaths, readLayers, insertLayer, deleteLayer, type LayerRow } from '../store/binding.ts';
import { doneChunks, writeChunk } from '../store/activations.ts';
import { poolBatch, type Pool, type LayerKind } from './pool.ts';
import { Progress, type ProgressReport } from './progress.ts';

export interface ScanRequest {
  model: string;
  probes: string;
  study: string;
  /** Tensor or node names; default: the model's default selection. */
  layers?: string[];
  batch?: number;
  pool?: Pool;
  /** Probes per committed chunk (fixed for the life of a study). */
  chunkSize?: number;
  threads?: number;
}

export interface ScanHooks {
  onProgress?: (p: ProgressReport) => void;
  /** Non-fatal messages for the user (resume, discarded stale data, flattened layers). */
  onNote?: (message: string) => void;
  signal?: AbortSignal;
  nativeBinding?: string;
}

export interface ExtractSummary {
  study: string;
  probes: number;
  layers: { name: string; units: number; kind: LayerKind }[];
  chunksComputed: number;
  chunksReused: number;
  resumed: boolean;
  seconds: number;
}

export const DEFAULT_CHUNK = 1024;
export const DEFAULT_BATCH = 64;

/** Runs the model over the probe set and caches every selected layer's activations in the study, resumably. */
export async function extract(req: ScanRequest, hooks: ScanHooks = {}): Promise<ExtractSummary> {
  const started = Date.now();
  const note = hooks.onNote ?? (() => {});
  const info = readModel(req.model);
  const probes = openProbeSet(req.probes);
  const fillShapes = resolveFillShapes(probes, info.inputs);
  for (const w of probes.warnings) note(w);
  const selected = selectLayers(info, req.layers);

  // Validate everything (the model loads and runs on one probe, the probe set opens) before the study is touched:
  // a model onnxruntime refuses must not discard what the study already holds.
  const modelBytes = fs.readFileSync(info.path);
  let session = await createSession(exposeTensors(modelBytes, selected.map((t) => t.name), { modelPath: info.path }), { intraOpThreads: req.threads }, info.path);
  const studyPath = path.resolve(req.study);
  const isNew = !fs.existsSync(studyPath);
  let db: Database.Database | null = null;
  let chunksWritten = 0;
  try {
    const fixed = fixedBatch(info.inputs.filter((i) => probes.inputs.some((s) => s.name === i.name) || i.name in probes.fill));
    const batch = fixed ?? Math.max(1, Math.floor(req.batch ?? DEFAULT_BATCH));
    if (fixed !== null && req.batch !== undefined && req.batch !== fixed) {
      note(`The model's batch dimension is fixed at ${fixed}; using batch ${fixed} instead of ${req.batch}.`);
    }
    const feeder = new Feeder(info, probes, fillShapes, fixed);
    const dims = await dryRunShapes(info, session, feeder.feeds(0, 1));
    const shapes = new Map(selected.map((t) => [t.name, dims[t.name].slice(1)]));

    const opened = openStudyDb(req.study, { create: true, nativeBinding: hooks.nativeBinding });
    db = opened;
    // Stale data is discarded in the transaction that binds the study to the new scan and records its layers.
    const { chunkSize, layers } = opened.transaction(() => {
      const size = bindToStudy(opened, info, probes, req.chunkSize ?? DEFAULT_CHUNK, note);
      return { chunkSize: size, layers: upsertLayers(opened, selected, shapes, req.pool ?? 'max', note) };
    })();
    // Pool inside the graph (core/model/pool-graph.ts): onnxruntime returns per-unit values, not whole maps.
    let pooledOutputs: Map<string, PooledOutputs> | null = null;
    if (canPoolInGraph(info.opsetVersion)) {
      const plans = layers.map((l) => ({ name: l.name, kind: l.kind, dims: l.dims, pool: (l.pool === 'none' ? 'max' : l.pool) as Pool }));
      const pooled = exposePooled(modelBytes, plans, { modelPath: info.path });
      await session.release();
      session = await createSession(pooled.bytes, { intraOpThreads: req.threads }, info.path);
      pooledOutputs = pooled.outputs;
    }
    {
      const chunks = Math.ceil(probes.count / chunkSize);
      const pending: { chunk: number; layers: LayerRow[] }[] = [];
      const done = new Map(layers.map((l) => [l.id, doneChunks(opened, l.id)]));
      let reused = 0;
      for (let c = 0; c < chunks; c++) {
        const missing = layers.filter((l) => !done.get(l.id)!.has(c));
        if (missing.length) pending.push({ chunk: c, layers: missing });
        else reused++;
      }
      const resumed = reused > 0 && pending.length > 0;
      if (resumed) note(`Resuming: ${reused} of ${chunks} chunks are already in the study.`);
      else if (reused === chunks) note('Every selected layer is already cached in the study; nothing to compute.');

      // Progress counts probes over the whole set; on a resume the cached chunks count as done from the start.
      const probesTodo = pending.reduce((s, p) => s + chunkLength(p.chunk, chunkSize, probes.count), 0);
      const progress = new Progress('extract', probes.count, hooks.onProgress, probes.count - probesTodo);

      for (const { chunk, layers: todo } of pending) {
        const start = chunk * chunkSize;
        const length = chunkLength(chunk, chunkSize, probes.count);
        const buffers = todo.map((l) => ({
          layer: l,
          values: new Float32Array(l.units * length),
          argmax: l.kind === 'conv' || l.kind === 'sequence' ? new Uint32Array(l.units * length) : null,
        }));
        for (let off = 0; off < length; off += batch) {
          throwIfAborted(hooks.signal);
          const count = Math.min(batch, length - off);
          if (pooledOutputs) {
            const fetch = todo.flatMap((l) => { const o = pooledOutputs!.get(l.name)!; return o.argmax ? [o.values, o.argmax] : [o.values]; });
            const out = await session.run(feeder.feeds(start + off, count), fetch);
            for (const buf of buffers) {
              const o = pooledOutputs.get(buf.layer.name)!;
              scatter(out[o.values].data as Float32Array, buf.values, buf.layer.units, count, length, off);
              if (buf.argmax && o.argmax) {
                const at = out[o.argmax].data as Int32Array;
                scatter(new Uint32Array(at.buffer, at.byteOffset, at.length), buf.argmax, buf.layer.units, count, length, off);
              } else if (buf.argmax && o.constantArgmax !== null) {
                for (let u = 0; u < buf.layer.units; u++) buf.argmax.fill(o.constantArgmax, u * length + off, u * length + off + count);
              }
            }
          } else {
            const out = await session.run(feeder.feeds(start + off, count), todo.map((l) => l.name));
            for (const buf of buffers) {
              const t = out[buf.layer.name];
              const pooled = poolBatch(asFloats(t), count, buf.layer.kind, buf.layer.dims, buf.layer.pool as Pool);
              scatter(pooled.values, buf.values, buf.layer.units, count, length, off);
              if (buf.argmax && pooled.argmax) scatter(pooled.argmax, buf.argmax, buf.layer.units, count, length, off);
            }
          }
          progress.advance(count);
        }
        throwIfAborted(hooks.signal);
        // One transaction per chunk: a kill leaves whole chunks only, so resume never mixes partial work in.
        writeChunk(opened, chunk, length, buffers.map((b) => ({ layerId: b.layer.id, units: b.layer.units, values: b.values, argmax: b.argmax })));
        chunksWritten++;
      }
      progress.finish();
      return {
        study: path.resolve(req.study),
        probes: probes.count,
        layers: layers.map((l) => ({ name: l.name, units: l.units, kind: l.kind })),
        chunksComputed: pending.length,
        chunksReused: reused,
        resumed,
        seconds: (Date.now() - started) / 1000,
      };
    }
  } catch (e) {
    // A scan that fails before its first chunk leaves no new study file behind.
    if (isNew && chunksWritten === 0) {
      db?.close();
      db = null;
      for (const f of [studyPath, `${studyPath}-wal`, `${studyPath}-shm`, `${studyPath}-journal`]) fs.rmSync(f, { force: true });
    }
    throw e;
  } finally {
    db?.close();
    await session.release();
  }
}

/** Exposed float16 tensors come back as raw half-precision bits; everything is stored as float32. */
export function asFloats(t: ort.Tensor): ArrayLike<number> {
  if (t.type === 'float16') return Float32Array.from(t.data as Uint16Array, float16BitsToNumber);
  return t.data as Float32Array | Float64Array;
}

function chunkLength(chunk: number, size: number, n: number): number {
  return Math.min(size, n - chunk * size);
}

/** Copies a unit-major [units × count] block into a unit-major [units × length] chunk buffer at offset. */
function scatter(src: Float32Array | Uint32Array, dst: Float32Array | Uint32Array, units: number, count: number, length: number, offset: number): void {
  for (let u = 0; u < units; u++) dst.set(src.subarray(u * count, (u + 1) * count), u * length + offset);
}

function throwIfAborted(signal?: AbortSignal): void {
  if (signal?.aborted) {
    throw new SkeinError({ code: 'cancelled', message: 'Scan cancelled. Completed chunks are saved; run the scan again to resume.' });
  }
}

export function selectLayers(info: ModelInfo, names?: string[]) {
  if (!names || names.length === 0) {
    const defaults = info.tensors.filter((t) => t.isDefault && t.capturable);
    if (defaults.length === 0) {
      throw new SkeinError({ code: 'model', file: info.path, message: 'No default layers found in this model. Name the tensors to capture with --layers (see skein layers).' });
    }
    return defaults;
  }
  return names.map((n) => {
    const t = info.tensors.find((x) => x.name === n) ?? info.tensors.find((x) => x.node === n);
    if (!t) {
      throw new SkeinError({ code: 'model', file: info.path, where: `layer ${n}`, message: `No tensor or node named "${n}". Run skein layers to list the capturable tensors.` });
    }
    if (!t.capturable) {
      throw new SkeinError({ code: 'model', file: info.path, where: `layer ${n}`, message: `Tensor "${n}" cannot be captured: ${t.reason ?? 'unsupported'}.` });
    }
    return t;
  });
}

/** A numeric batch dimension shared by the fed inputs, or null when it is dynamic. */
export function fixedBatch(inputs: ValueInfo[]): number | null {
  let fixed: number | null = null;
  for (const i of inputs) {
    const f = batchPolicy(i).fixed;
    if (f !== null) fixed = fixed === null ? f : Math.min(fixed, f);
  }
  return fixed;
}

/** Binds the study to this model + probe set; discards stale activations and scores when either changed. */
function bindToStudy(db: Database.Database, info: ModelInfo, probes: ProbeSet, chunkSize: number, note: (m: string) => void): number {
  const bound = readBinding(db);
  if (bound && bound.modelFp === info.fingerprint && bound.probesFp === probes.fingerprint) {
    updateBindingPaths(db, info.path, probes.dir);
    return bound.chunkSize;
  }
  if (bound) {
    const what = [bound.modelFp !== info.fingerprint ? 'model' : null, bound.probesFp !== probes.fingerprint ? 'probe set' : null].filter(Boolean).join(' and ');
    note(`The ${what} changed since this study was made: its cached activations and scores were discarded (review annotations are kept).`);
  }
  bindStudy(db,
    { path: info.path, fingerprint: info.fingerprint, json: JSON.stringify({ producer: info.producer, opset: info.opsetVersion, inputs: info.inputs, outputs: info.outputs, bytes: info.bytes }) },
    { dir: probes.dir, fingerprint: probes.fingerprint, name: probes.name, count: probes.count, labels: probes.labels, labelOffsets: probes.labelOffsets,
      labelIds: probes.labelIds, concepts: probes.concepts, examples: probes.examples, relatedness: probes.relatedness },
    chunkSize);
  return chunkSize;
}

function upsertLayers(db: Database.Database, selected: ModelInfo['tensors'], shapes: Map<string, number[]>, pool: Pool, note: (m: string) => void): LayerRow[] {
  const existing = new Map(readLayers(db).map((l) => [l.name, l]));
  db.transaction(() => {
    selected.forEach((t, i) => {
      const dims = shapes.get(t.name)!;
      const layout = unitLayout(dims);
      if (layout.warning) note(`${t.name}: ${layout.warning}`);
      const layerPool = layout.kind === 'dense' || layout.kind === 'flat' ? 'none' : pool;
      const old = existing.get(t.name);
      if (old && (old.pool !== layerPool || JSON.stringify(old.dims) !== JSON.stringify(dims))) {
        note(`${t.name}: cached with pool ${old.pool}, now ${layerPool}; its cached activations were discarded.`);
        deleteLayer(db, old.id);
        existing.delete(t.name);
      }
      if (!existing.has(t.name)) insertLayer(db, { name: t.name, op: t.op, node: t.node, position: i, dims, kind: layout.kind, units: layout.units, pool: layerPool });
    });
  })();
  const names = new Set(selected.map((t) => t.name));
  return readLayers(db).filter((l) => names.has(l.name));
}

type TypedData = Float32Array | Float64Array | Int32Array | BigInt64Array | Uint8Array;

/** Builds feeds for a range of probes: probe-set inputs, fill values, and padding to a fixed batch. */
export class Feeder {
  constructor(private info: ModelInfo, private probes: ProbeSet, private fillShapes: Record<string, number[]>, private fixed: number | null) {}

  feeds(start: number, count: number): Record<string, ort.Tensor> {
    const rows = this.fixed ?? count;
    const feeds: Record<string, ort.Tensor> = {};
    for (const input of this.info.inputs) {
      const src = this.probes.inputs.find((s) => s.name === input.name);
      if (src) {
        const per = src.rowShape.reduce((a, b) => a * b, 1);
        let data: TypedData = src.readRows(start, count);
        if (rows > count) data = padRows(data, per, count, rows);
        feeds[input.name] = toTensor(input, data, [rows, ...src.rowShape]);
      } else {
        // Per-probe shape from core/probes (symbolic dims sized by the provided inputs); a rank-0 input is a scalar.
        const value = this.probes.fill[input.name];
        const dims = input.dims?.length === 0 ? [] : [rows, ...this.fillShapes[input.name]];
        const size = dims.reduce((a, b) => a * b, 1);
        feeds[input.name] = toTensor(input, new Float64Array(size).fill(value), dims);
      }
    }
    return feeds;
  }
}

function padRows(data: TypedData, per: number, count: number, rows: number): TypedData {
  const out = new (data.constructor as { new (n: number): TypedData })(per * rows);
  (out as Float32Array).set(data as Float32Array);
  for (let r = count; r < rows; r++) (out as Float32Array).copyWithin(r * per, (count - 1) * per, count * per);
  return out;
}

/** Converts probe-set values to the element type the model input declares. */
function toTensor(input: ValueInfo, data: TypedData, dims: number[]): ort.Tensor {
  switch (input.elemType) {
    case 'float32': return new ort.Tensor('float32', data instanceof Float32Array ? data : Float32Array.from(data as ArrayLike<number>, Number), dims);
    case 'float64': return new ort.Tensor('float64', data instanceof Float64Array ? data : Float64Array.from(data as ArrayLike<number>, Number), dims);
    case 'int64': return new ort.Tensor('int64', data instanceof BigInt64Array ? data : BigInt64Array.from(data as ArrayLike<number>, (v) => BigInt(Math.round(Number(v)))), dims);
    case 'int32': return new ort.Tensor('int32', data instanceof Int32Array ? data : Int32Array.from(data as ArrayLike<number>, Number), dims);
    case 'uint8': return new ort.Tensor('uint8', data instanceof Uint8Array ? data : Uint8Array.from(data as ArrayLike<number>, Number), dims);
    case 'bool': return new ort.Tensor('bool', data instanceof Uint8Array ? data : Uint8Array.from(data as ArrayLike<number>, (v) => (Number(v) ? 1 : 0)), dims);
    default:
      throw new SkeinError({ code: 'model', where: `input ${input.name}`, message: `Model input "${input.name}" has element type ${input.elemType}, which Skein cannot feed. Export the model with a float32, int64, int32, uint8 or bool input.` });
  }
}
