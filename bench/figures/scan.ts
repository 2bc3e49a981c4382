/**
 * Scan overhead: a full scan (every default layer captured and written to the study) against raw onnxruntime-node
 * inference of the same model, batch size and probes with no extra outputs. A third variant runs the scan's own graph
 * (layers exposed and pooled in the graph) and stores nothing; with the disk's write rate it gives the physical limit.
 */
import fs from 'node:fs';
import path from 'node:path';
import * as ort from 'onnxruntime-node';
import { createSession, exposeTensors, readModel, unitLayout } from '../../core/model/index.ts';
import { extract, selectLayers, DEFAULT_BATCH } from '../../core/extract/scan.ts';
import { exposePooled } from '../../core/model/pool-graph.ts';
import { openNpy } from '../../core/probes/index.ts';
import type { BenchModel } from '../lib/models.ts';
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
  /** The scan's own graph (layers exposed and pooled in the graph), nothing stored: inference with the tensors exposed. */
  captureSeconds: number[];
  scanSeconds: number[];
  /** CPU seconds of this process (all threads), same runs. */
  rawCpu: number[];
  captureCpu: number[];
  scanCpu: number[];
  /** The disk's sequential write rate (bytes/s) measured beside each scan with the study's byte count. */
  diskRates: number[];
  /** Physical limit per rep: max(capture seconds, study bytes / disk rate). */
  limitSeconds: number[];
  rawRate: number;
  captureRate: number;
  scanRate: number;
  ratio: number;
  captureRatio: number;
  studyBytes: number;
  /** Study file bytes (with its WAL) per million stored activations. */
  mbPerMillion: number;
  /** Median of scan seconds / physical-limit seconds over the reps. */
  limitRatio: number;
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

/**
 * The scan's own graph (every default layer exposed and pooled inside the graph, core/model/pool-graph.ts) run over
 * the probes with nothing copied, transposed or stored: the inference half of the physical limit.
 */
async function prepareExposed(modelPath: string, inputs: ReturnType<typeof loadInputs>): Promise<{ bytes: Uint8Array; fetch: string[] }> {
  const selected = selectLayers(readModel(modelPath));
  const original = fs.readFileSync(modelPath);
  const probe = await createSession(exposeTensors(original, selected.map((t) => t.name)));
  try {
    const out = await probe.run(feedRows(inputs, 0, 1), selected.map((t) => t.name));
    const plans = selected.map((t) => {
      const dims = out[t.name].dims.slice(1).map(Number);
      return { name: t.name, kind: unitLayout(dims).kind, dims, pool: 'max' as const };
    });
    const pooled = exposePooled(original, plans);
    return { bytes: pooled.bytes, fetch: [...pooled.outputs.values()].flatMap((o) => (o.argmax ? [o.values, o.argmax] : [o.values])) };
  } finally {
    await probe.release();
  }
}

async function exposedOnly(exposed: { bytes: Uint8Array; fetch: string[] }, inputs: ReturnType<typeof loadInputs>, batch: number): Promise<number> {
  const session = await createSession(exposed.bytes);
  try {
    let checksum = 0;
    for (let off = 0; off < inputs.count; off += batch) {
      const count = Math.min(batch, inputs.count - off);
      const out = await session.run(feedRows(inputs, off, count), exposed.fetch);
      checksum += (out[exposed.fetch[0]].data as Float32Array)[0];
    }
    return checksum;
  } finally {
    await session.release();
  }
}

function feedRows(inputs: ReturnType<typeof loadInputs>, off: number, count: number) {
  const per = inputs.rowShape.reduce((a, b) => a * b, 1);
  return { x: new ort.Tensor('float32', inputs.rows.subarray(off * per, (off + count) * per), [count, ...inputs.rowShape]) };
}

/** The disk's sequential write rate: `bytes` written in 1 MiB blocks and fsynced once (bytes per second). */
function diskWriteRate(dir: string, bytes: number): number {
  const file = path.join(dir, 'disk-rate.bin');
  const block = Buffer.alloc(1 << 20, 7);
  const start = process.hrtime.bigint();
  const fd = fs.openSync(file, 'w');
  try {
    for (let done = 0; done < bytes; done += block.length) fs.writeSync(fd, block, 0, Math.min(block.length, bytes - done));
    fs.fsyncSync(fd);
  } finally {
    fs.closeSync(fd);
  }
  const s = Number(process.hrtime.bigint() - start) / 1e9;
  fs.rmSync(file, { force: true });
  return bytes / s;
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
  const diskRates: number[] = [];
  const limitSeconds: number[] = [];
  const exposed = await prepareExposed(modelPath, inputs);
  let layers: ScanFigure['layers'] = [];
  let studyBytes = 0;
  // warm-up: one small pass so the first measured run does not pay for loading the native addon
  await rawInference(model.bytes, { ...inputs, count: Math.min(inputs.count, 4 * batch) }, batch, null);
  for (let rep = 0; rep < reps; rep++) {
    const raw = await timed(() => rawInference(model.bytes, inputs, batch, null));
    rawSeconds.push(raw.seconds);
    rawCpu.push(raw.cpuSeconds);
    const capture = await timed(() => exposedOnly(exposed, inputs, batch));
    captureSeconds.push(capture.seconds);
    captureCpu.push(capture.cpuSeconds);
    for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
    const scan = await timed(() => extract({ model: modelPath, probes: probesDir, study, batch }));
    scanSeconds.push(scan.seconds);
    scanCpu.push(scan.cpuSeconds);
    layers = scan.value.layers;
    studyBytes = fs.statSync(study).size + (fs.existsSync(`${study}-wal`) ? fs.statSync(`${study}-wal`).size : 0);
    diskRates.push(diskWriteRate(outDir, studyBytes));
    limitSeconds.push(Math.max(capture.seconds, studyBytes / diskRates[rep]));
    log(`  ${model.name} rep ${rep + 1}/${reps}: raw ${rawSeconds[rep].toFixed(2)} s, exposed ${captureSeconds[rep].toFixed(2)} s, scan ${scanSeconds[rep].toFixed(2)} s, ` +
      `study ${(studyBytes / 1e6).toFixed(1)} MB at ${(diskRates[rep] / 1e6).toFixed(0)} MB/s → limit ${limitSeconds[rep].toFixed(2)} s`);
  }
  for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
  const units = layers.reduce((s, l) => s + l.units, 0);
  const rawRate = probeCount / median(rawSeconds);
  const captureRate = probeCount / median(captureSeconds);
  const scanRate = probeCount / median(scanSeconds);
  return {
    model: model.name, description: model.description, probes: probeCount, batch, layers, units,
    activationBytes: units * probeCount * 4, rawSeconds, captureSeconds, scanSeconds, rawCpu, captureCpu, scanCpu,
    rawRate, captureRate, scanRate, ratio: scanRate / rawRate, captureRatio: captureRate / rawRate, studyBytes,
    diskRates, limitSeconds, mbPerMillion: studyBytes / 1e6 / ((units * probeCount) / 1e6),
    limitRatio: median(scanSeconds.map((x, i) => x / limitSeconds[i])),
  };
}
