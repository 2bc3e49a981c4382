/**
 * Scan overhead: a full scan (every default layer captured and written to the study) against raw onnxruntime-node
 * inference of the same model, batch size and probes with no extra outputs. A third variant captures and pools the
 * same layers but writes nothing, so the report can say where the overhead goes.
 */
import fs from 'node:fs';
import path from 'node:path';
import * as ort from 'onnxruntime-node';
import { createSession, exposeTensors, readModel, unitLayout } from '../../core/model/index.ts';
import { extract, selectLayers, DEFAULT_BATCH } from '../../core/extract/scan.ts';
import { poolBatch } from '../../core/extract/pool.ts';
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
  captureSeconds: number[];
  scanSeconds: number[];
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
  let layers: ScanFigure['layers'] = [];
  let studyBytes = 0;
  // warm-up: one small pass so the first measured run does not pay for loading the native addon
  await rawInference(model.bytes, { ...inputs, count: Math.min(inputs.count, 4 * batch) }, batch, null);
  for (let rep = 0; rep < reps; rep++) {
    rawSeconds.push((await timed(() => rawInference(model.bytes, inputs, batch, null))).seconds);
    captureSeconds.push((await timed(() => captureOnly(modelPath, inputs, batch))).seconds);
    for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
    const scan = await timed(() => extract({ model: modelPath, probes: probesDir, study, batch }));
    scanSeconds.push(scan.seconds);
    layers = scan.value.layers;
    studyBytes = fs.statSync(study).size + (fs.existsSync(`${study}-wal`) ? fs.statSync(`${study}-wal`).size : 0);
    log(`  ${model.name} rep ${rep + 1}/${reps}: raw ${rawSeconds[rep].toFixed(2)} s, capture ${captureSeconds[rep].toFixed(2)} s, scan ${scanSeconds[rep].toFixed(2)} s`);
  }
  for (const f of [study, `${study}-wal`, `${study}-shm`]) fs.rmSync(f, { force: true });
  const units = layers.reduce((s, l) => s + l.units, 0);
  const rawRate = probeCount / median(rawSeconds);
  const captureRate = probeCount / median(captureSeconds);
  const scanRate = probeCount / median(scanSeconds);
  return {
    model: model.name, description: model.description, probes: probeCount, batch, layers, units,
    activationBytes: units * probeCount * 4, rawSeconds, captureSeconds, scanSeconds,
    rawRate, captureRate, scanRate, ratio: scanRate / rawRate, captureRatio: captureRate / rawRate, studyBytes,
  };
}
