/**
 * Scan overhead: a full scan (every default layer captured and written to the study) against raw onnxruntime-node
 * inference of the same model, batch size and probes with no extra outputs. A third variant captures and pools the
 * same layers but writes nothing, so the report can say where the overhead goes.
 */
import fs from 'node:fs';
import path from 'node:path';
import * as ort from 'onnxruntime-node';
import { createSession, exposeTensors, readModel, unitLayout } from '../../core/model/index.ts';
import { Worker } from 'node:worker_threads';
import { extract, selectLayers, DEFAULT_BATCH, DEFAULT_CHUNK } from '../../core/extract/scan.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { bindStudy, insertLayer } from '../../core/store/binding.ts';
import { poolBatch } from '../../core/extract/pool.ts';
import { openNpy } from '../../core/probes/index.ts';
import type { BenchModel } from '../lib/models.ts';
import { exposePooled } from '../lib/pool-in-graph.ts';
import { writeProbeSet } from '../lib/probes.ts';
import { median, timed } from '../lib/measure.ts';

export interface ScanFigure {
  model: string;
  description: string;
  probes: number;
  batch: number;
  layers: { name: string; units: number; kind: string }[];
  units: number;
  activationBytes: number;
  rawSeconds: number[];
  captureSeconds: number[];
  scanSeconds: number[];
  /** CPU seconds of this process (all threads), same runs. */
  rawCpu: number[];
  captureCpu: number[];
  scanCpu: number[];
  /** Conv models only: capture with the pooling done inside the graph (the proposal in bench/lib/pool-in-graph.ts). */
  graphPoolSeconds: number[] | null;
  graphPoolCpu: number[] | null;
  graphPoolRate: number | null;
  graphPoolRatio: number | null;
  /** Dense models only: the scan with its chunk commits on a worker thread (the proposal above). */
  pipelinedSeconds: number[] | null;
  pipelinedCpu: number[] | null;
  pipelinedRate: number | null;
  pipelinedRatio: number | null;
  rawRate: number;
  captureRate: number;
  scanRate: number;
  ratio: number;
  captureRatio: number;
  studyBytes: number;
}

/** All probes of the set in memory, so the raw baseline pays for nothing but inference. */
function loadInputs(dir: string): { rows: Float32Array; rowShape: number[]; count: number } {
  const npy = openNpy(path.join(dir, 'x.npy'));
  return { rows: npy.readRows(0, npy.count) as Float32Array, rowShape: npy.rowShape, count: npy.count };
}

async function rawInference(modelBytes: Uint8Array, inputs: ReturnType<typeof loadInputs>, batch: number, outputs: string[] | null): Promise<number> {
  const session = await createSession(modelBytes);
  try {
    const per = inputs.rowShape.reduce((a, b) => a * b, 1);
    let checksum = 0;
    for (let off = 0; off < inputs.count; off += batch) {
      const count = Math.min(batch, inputs.count - off);
      const x = new ort.Tensor('float32', inputs.rows.subarray(off * per, (off + count) * per), [count, ...inputs.rowShape]);
      const out = outputs ? await session.run({ x }, outputs) : await session.run({ x });
      checksum += (out[session.outputNames[0]].data as Float32Array)[0];
    }
    return checksum;
  } finally {
    await session.release();
  }
}

/** Inference with the layers exposed, pooled to per-unit values as the scan does, but nothing stored. */
async function captureOnly(modelPath: string, inputs: ReturnType<typeof loadInputs>, batch: number): Promise<number> {
  const info = readModel(modelPath);
  const selected = selectLayers(info);
  const names = selected.map((t) => t.name);
  const session = await createSession(exposeTensors(fs.readFileSync(modelPath), names));
  try {
    const per = inputs.rowShape.reduce((a, b) => a * b, 1);
    let checksum = 0;
    for (let off = 0; off < inputs.count; off += batch) {
      const count = Math.min(batch, inputs.count - off);
      const x = new ort.Tensor('float32', inputs.rows.subarray(off * per, (off + count) * per), [count, ...inputs.rowShape]);
      const out = await session.run({ x }, names);
      for (const n of names) {
        const dims = out[n].dims.slice(1).map(Number);
        const layout = unitLayout(dims);
        const pooled = poolBatch(out[n].data as Float32Array, count, layout.kind, dims, 'max');
        checksum += pooled.values[0];
      }
    }
    return checksum;
  } finally {
    await session.release();
  }
}

interface GraphPooled {
  pooled: ReturnType<typeof exposePooled>;
  convs: Map<string, number>;
  units: Map<string, number>;
  /** The first batches as core/extract/pool.ts pools the full maps. */
  expected: Map<string, { values: Float32Array; argmax: Uint32Array | null }>[];
}

function feedRows(inputs: ReturnType<typeof loadInputs>, off: number, count: number) {
  const per = inputs.rowShape.reduce((a, b) => a * b, 1);
  return { x: new ort.Tensor('float32', inputs.rows.subarray(off * per, (off + count) * per), [count, ...inputs.rowShape]) };
}

/** Builds the graph-pooled model and the reference values of its first batches (not timed). */
async function prepareGraphPooled(modelPath: string, inputs: ReturnType<typeof loadInputs>, batch: number, checkBatches: number): Promise<GraphPooled> {
  const selected = selectLayers(readModel(modelPath));
  const original = fs.readFileSync(modelPath);
  const session = await createSession(exposeTensors(original, selected.map((t) => t.name)));
  const convs = new Map<string, number>();
  const units = new Map<string, number>();
  const dense: string[] = [];
  const expected: GraphPooled['expected'] = [];
  try {
    for (let b = 0; b < checkBatches && b * batch < inputs.count; b++) {
      const count = Math.min(batch, inputs.count - b * batch);
      const out = await session.run(feedRows(inputs, b * batch, count), selected.map((t) => t.name));
      const m = new Map<string, { values: Float32Array; argmax: Uint32Array | null }>();
      for (const t of selected) {
        const dims = out[t.name].dims.slice(1).map(Number);
        const layout = unitLayout(dims);
        if (b === 0) {
          units.set(t.name, layout.units);
          if (layout.kind === 'conv') convs.set(t.name, dims[0]);
          else dense.push(t.name);
        }
        m.set(t.name, poolBatch(out[t.name].data as Float32Array, count, layout.kind, dims, 'max'));
      }
      expected.push(m);
    }
  } finally {
    await session.release();
  }
  return { pooled: exposePooled(original, convs, dense), convs, units, expected };
}

/**
 * Capture with conv maps pooled inside the graph: onnxruntime returns [B, C] values and locations, turned
 * unit-major as the scan stores them. The first batches are compared with core/extract/pool.ts on the full maps:
 * the numbers must not change.
 */
async function captureGraphPooled(g: GraphPooled, inputs: ReturnType<typeof loadInputs>, batch: number): Promise<number> {
  const names = [...g.pooled.outputs.values()].flatMap((o) => (o.argmax ? [o.values, o.argmax] : [o.values]));
  const session = await createSession(g.pooled.bytes);
  try {
    let checksum = 0;
    for (let off = 0, b = 0; off < inputs.count; off += batch, b++) {
      const count = Math.min(batch, inputs.count - off);
      const out = await session.run(feedRows(inputs, off, count), names);
      for (const [name, o] of g.pooled.outputs) {
        const units = g.units.get(name)!;
        const values = poolBatch(out[o.values].data as Float32Array, count, 'dense', [units], 'max').values;
        let argmax: Uint32Array | null = null;
        if (o.argmax) {
          const raw = out[o.argmax].data as BigInt64Array;
          argmax = new Uint32Array(units * count);
          for (let s = 0; s < count; s++) for (let u = 0; u < units; u++) argmax[u * count + s] = Number(raw[s * units + u]);
        }
        const want = g.expected[b]?.get(name);
        if (want) {
          for (let i = 0; i < values.length; i++) {
            if (values[i] !== want.values[i] || (argmax && want.argmax && argmax[i] !== want.argmax[i])) {
              throw new Error(`pooling in the graph changed ${name} at batch ${b}, index ${i}: ${values[i]}@${argmax?.[i]} vs ${want.values[i]}@${want.argmax?.[i]}`);
            }
          }
        }
        checksum += values[0];
      }
    }
    return checksum;
  } finally {
    await session.release();
  }
}

/**
 * The pipelined-scan proposal for dense layers: the scan's capture, pooling and chunk buffers on the main thread,
 * the chunk commits (same statements, same transaction per chunk, same pragmas) on a worker thread with its own
 * connection, at most two chunks in flight. onnxruntime's run blocks the main thread, so this is what lets SQLite
 * work while the next chunk is inferred.
 */
async function pipelinedScan(modelPath: string, inputs: ReturnType<typeof loadInputs>, batch: number, study: string): Promise<number> {
  for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
  const selected = selectLayers(readModel(modelPath));
  const names = selected.map((t) => t.name);
  const session = await createSession(exposeTensors(fs.readFileSync(modelPath), names));
  const chunkSize = DEFAULT_CHUNK;
  try {
    const first = await session.run(feedRows(inputs, 0, 1), names);
    const layers = selected.map((t, i) => {
      const dims = first[t.name].dims.slice(1).map(Number);
      return { id: i + 1, name: t.name, dims, layout: unitLayout(dims) };
    });
    if (layers.some((l) => l.layout.kind !== 'dense')) throw new Error('pipelinedScan: dense layers only');
    const db = openStudyDb(study, { create: true });
    try {
      bindStudy(db, { path: modelPath, fingerprint: 'bench', json: '{}' },
        { dir: 'bench', fingerprint: 'bench', name: 'bench', count: inputs.count, labels: [], labelOffsets: new Int32Array(inputs.count + 1), labelIds: new Int32Array(0), concepts: null, examples: null, relatedness: null },
        chunkSize);
      for (const l of layers) l.id = insertLayer(db, { name: l.name, op: 'Relu', node: l.name, position: l.id, dims: l.dims, kind: 'dense', units: l.layout.units, pool: 'none' });
    } finally {
      db.close();
    }
    const worker = new Worker(new URL('../lib/write-worker.mjs', import.meta.url), { workerData: { study } });
    let inFlight = 0;
    let wake: (() => void) | null = null;
    let failure: Error | null = null;
    worker.on('message', (m) => { if (m !== 'closed') inFlight--; wake?.(); });
    worker.on('error', (e) => { failure = e; wake?.(); });
    const waitUntil = async (ok: () => boolean) => {
      while (!ok() && !failure) await new Promise<void>((r) => { wake = r; });
      if (failure) throw failure;
    };
    let checksum = 0;
    for (let start = 0, chunk = 0; start < inputs.count; start += chunkSize, chunk++) {
      const length = Math.min(chunkSize, inputs.count - start);
      const buffers = layers.map((l) => ({ id: l.id, units: l.layout.units, length, values: new Float32Array(l.layout.units * length) }));
      for (let off = 0; off < length; off += batch) {
        const count = Math.min(batch, length - off);
        const out = await session.run(feedRows(inputs, start + off, count), names);
        layers.forEach((l, i) => {
          const pooled = poolBatch(out[l.name].data as Float32Array, count, 'dense', l.dims, 'max');
          const dst = buffers[i].values;
          for (let u = 0; u < l.layout.units; u++) dst.set(pooled.values.subarray(u * count, (u + 1) * count), u * length + off);
        });
      }
      checksum += buffers[0].values[0];
      await waitUntil(() => inFlight < 2);
      inFlight++;
      worker.postMessage({ chunk, layers: buffers }, buffers.map((b) => b.values.buffer));
    }
    await waitUntil(() => inFlight === 0);
    const closed = new Promise<void>((r) => worker.once('message', () => r()));
    worker.postMessage('close');
    await closed;
    await worker.terminate();
    return checksum;
  } finally {
    await session.release();
  }
}

export async function scanFigure(outDir: string, model: BenchModel, probeCount: number, reps: number, log: (s: string) => void): Promise<ScanFigure> {
  fs.mkdirSync(outDir, { recursive: true });
  const modelPath = path.join(outDir, `${model.name}.onnx`);
  fs.writeFileSync(modelPath, model.bytes);
  const probesDir = path.join(outDir, `${model.name}-probes-${probeCount}`);
  if (!fs.existsSync(path.join(probesDir, 'manifest.json'))) writeProbeSet(probesDir, model.inputName, model.rowShape, probeCount, 30, 11);
  const inputs = loadInputs(probesDir);
  const batch = DEFAULT_BATCH;
  const study = path.join(outDir, `${model.name}.study`);
  const rawSeconds: number[] = [];
  const captureSeconds: number[] = [];
  const scanSeconds: number[] = [];
  const rawCpu: number[] = [];
  const captureCpu: number[] = [];
  const scanCpu: number[] = [];
  const hasConv = selectLayers(readModel(modelPath)).some((t) => (t.dims?.length ?? 0) === 4);
  const graphPoolSeconds: number[] | null = hasConv ? [] : null;
  const graphPoolCpu: number[] | null = hasConv ? [] : null;
  const graphPooled = hasConv ? await prepareGraphPooled(modelPath, inputs, batch, 8) : null;
  const pipelinedSeconds: number[] | null = hasConv ? null : [];
  const pipelinedCpu: number[] | null = hasConv ? null : [];
  const pipelinedStudy = path.join(outDir, `${model.name}-pipelined.study`);
  let layers: ScanFigure['layers'] = [];
  let studyBytes = 0;
  // warm-up: one small pass so the first measured run does not pay for loading the native addon
  await rawInference(model.bytes, { ...inputs, count: Math.min(inputs.count, 4 * batch) }, batch, null);
  for (let rep = 0; rep < reps; rep++) {
    const raw = await timed(() => rawInference(model.bytes, inputs, batch, null));
    rawSeconds.push(raw.seconds);
    rawCpu.push(raw.cpuSeconds);
    const capture = await timed(() => captureOnly(modelPath, inputs, batch));
    captureSeconds.push(capture.seconds);
    captureCpu.push(capture.cpuSeconds);
    for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
    const scan = await timed(() => extract({ model: modelPath, probes: probesDir, study, batch }));
    scanSeconds.push(scan.seconds);
    scanCpu.push(scan.cpuSeconds);
    if (pipelinedSeconds && pipelinedCpu) {
      const p = await timed(() => pipelinedScan(modelPath, inputs, batch, pipelinedStudy));
      pipelinedSeconds.push(p.seconds);
      pipelinedCpu.push(p.cpuSeconds);
    }
    if (graphPoolSeconds && graphPoolCpu && graphPooled) {
      const g = await timed(() => captureGraphPooled(graphPooled, inputs, batch));
      graphPoolSeconds.push(g.seconds);
      graphPoolCpu.push(g.cpuSeconds);
    }
    layers = scan.value.layers;
    studyBytes = fs.statSync(study).size + (fs.existsSync(`${study}-wal`) ? fs.statSync(`${study}-wal`).size : 0);
    log(`  ${model.name} rep ${rep + 1}/${reps}: raw ${rawSeconds[rep].toFixed(2)} s, capture ${captureSeconds[rep].toFixed(2)} s, scan ${scanSeconds[rep].toFixed(2)} s` +
      (graphPoolSeconds ? `, capture pooled in the graph ${graphPoolSeconds[rep].toFixed(2)} s` : '') +
      (pipelinedSeconds ? `, scan with commits on a worker ${pipelinedSeconds[rep].toFixed(2)} s` : ''));
  }
  for (const f of [study, pipelinedStudy].flatMap((x) => [x, `${x}-wal`, `${x}-shm`])) fs.rmSync(f, { force: true });
  const units = layers.reduce((s, l) => s + l.units, 0);
  const rawRate = probeCount / median(rawSeconds);
  const captureRate = probeCount / median(captureSeconds);
  const scanRate = probeCount / median(scanSeconds);
  return {
    model: model.name, description: model.description, probes: probeCount, batch, layers, units,
    activationBytes: units * probeCount * 4, rawSeconds, captureSeconds, scanSeconds, rawCpu, captureCpu, scanCpu,
    rawRate, captureRate, scanRate, ratio: scanRate / rawRate, captureRatio: captureRate / rawRate, studyBytes,
    graphPoolSeconds, graphPoolCpu,
    graphPoolRate: graphPoolSeconds ? probeCount / median(graphPoolSeconds) : null,
    graphPoolRatio: graphPoolSeconds ? probeCount / median(graphPoolSeconds) / rawRate : null,
    pipelinedSeconds, pipelinedCpu,
    pipelinedRate: pipelinedSeconds ? probeCount / median(pipelinedSeconds) : null,
    pipelinedRatio: pipelinedSeconds ? probeCount / median(pipelinedSeconds) / rawRate : null,
  };
}
