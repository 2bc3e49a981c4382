/**
 * Bulk ablation cost per unit against one plain inference pass of the same model over the same probes, side by
 * side in one run. The limit: one inference per unit (ratio ≤ 1). Also where a unit's time goes (the downstream
 * run vs the statistics) and how it grows with probes and units.
 */
import fs from 'node:fs';
import path from 'node:path';
import * as ort from 'onnxruntime-node';
import { runScan } from '../../core/api/index.ts';
import { createSession } from '../../core/model/index.ts';
import { openProbeSet } from '../../core/probes/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { clearAblations } from '../../core/store/ablation.ts';
import { ablateLayer, BULK_REPS } from '../../core/intervene/job.ts';
import { Ablator } from '../../core/intervene/run.ts';
import { probeHarm, labelCosts } from '../../core/intervene/effects.ts';
import { cnn } from '../lib/models.ts';
import { writeProbeSet } from '../lib/probes.ts';
import { median, repoRoot } from '../lib/measure.ts';

const BATCH = 512;

export interface AblationCase {
  model: string; layer: string; units: number; probes: number; metric: string;
  plainSeconds: number; perUnitSeconds: number; ratio: number;
  /** The same ratio on CPU seconds of this process (less sensitive to other work on a shared machine). */
  plainCpuSeconds: number; perUnitCpuSeconds: number; cpuRatio: number;
  /** Upstream pass + baseline, once per layer and setup. */
  oneOffSeconds: number;
  /** Of one unit's time: the downstream run, and the per-label statistics (Welch tests, BH, one bootstrap interval). */
  forwardSeconds: number; statsSeconds: number;
}

export interface AblationFigure {
  cases: AblationCase[];
  growth: { model: string; layer: string; probes: number; perUnitSeconds: number; plainSeconds: number; ratio: number }[];
  /** Total time of the bulk pass against the number of units ablated (one layer, nothing reused). */
  unitsGrowth: { layer: string; units: number; seconds: number }[];
}

/** One plain inference pass over the first `count` probes, batch 512, model outputs only (median of reps): wall and CPU seconds. */
async function plainPass(modelFile: string, probesDir: string, count: number, reps: number): Promise<{ wall: number; cpu: number }> {
  const probes = openProbeSet(probesDir);
  const input = probes.inputs[0];
  const per = input.rowShape.reduce((a, b) => a * b, 1);
  const rows = input.readRows(0, count) as Float32Array;
  const session = await createSession(fs.readFileSync(modelFile));
  const times: number[] = [];
  const cpus: number[] = [];
  try {
    for (let r = 0; r < reps; r++) {
      const t = performance.now();
      const c = process.cpuUsage();
      for (let off = 0; off < count; off += BATCH) {
        const n = Math.min(BATCH, count - off);
        await session.run({ [input.name]: new ort.Tensor('float32', rows.subarray(off * per, (off + n) * per), [n, ...input.rowShape]) });
      }
      times.push((performance.now() - t) / 1000);
      const u = process.cpuUsage(c);
      cpus.push((u.user + u.system) / 1e6);
    }
  } finally {
    await session.release();
  }
  return { wall: median(times), cpu: median(cpus) };
}

async function measureLayer(study: string, model: string, probesDir: string, name: string, layer: string, reps: number, sample?: number): Promise<AblationCase> {
  const db = openStudyDb(study);
  try {
    const probes = sample ?? openProbeSet(probesDir).count;
    // Interleaved, fresh each time (nothing reused), medians: the machine is shared and noisy.
    const plain: number[] = [];
    const perUnit: number[] = [];
    const plainCpu: number[] = [];
    const perUnitCpu: number[] = [];
    let s!: Awaited<ReturnType<typeof ablateLayer>>;
    for (let r = 0; r < reps; r++) {
      const p = await plainPass(model, probesDir, probes, 1);
      plain.push(p.wall);
      plainCpu.push(p.cpu);
      clearAblations(db);
      s = await ablateLayer(db, { model, layer, mode: 'zero', sample });
      perUnit.push(s.perUnitSeconds);
      perUnitCpu.push(s.perUnitCpuSeconds);
    }
    const plainSeconds = median(plain);
    const perUnitSeconds = median(perUnit);
    // Where one unit's time goes, on the same setup.
    const a = await Ablator.open(db, { model, layer, mode: 'zero', sample });
    let fwd = 0; let stats = 0;
    const units = Math.min(a.ctx.layer.units, 8);
    for (let u = 0; u < units; u++) {
      const t0 = performance.now();
      const out = await a.outputs([u]);
      const t1 = performance.now();
      labelCosts(probeHarm(a.ctx.baseline, a.ctx.plan, out), a.ctx.index, a.ctx.similarity, { reps: BULK_REPS, intervals: 'largest', seed: 1 });
      stats += performance.now() - t1; fwd += t1 - t0;
    }
    const oneOff = a.ctx.timing.upstream + a.ctx.timing.baseline;
    await a.release();
    return {
      model: name, layer, units: s.run.units, probes, metric: s.run.metric, plainSeconds, perUnitSeconds,
      ratio: perUnitSeconds / plainSeconds,
      plainCpuSeconds: median(plainCpu), perUnitCpuSeconds: median(perUnitCpu), cpuRatio: median(perUnitCpu) / median(plainCpu), oneOffSeconds: oneOff, forwardSeconds: fwd / units / 1000, statsSeconds: stats / units / 1000,
    };
  } finally {
    db.close();
  }
}

export async function ablationFigure(work: string, sizes: { probes: number; reps: number; cnn: [number, number, number, number] }, log: (s: string) => void): Promise<AblationFigure> {
  fs.mkdirSync(work, { recursive: true });
  const cases: AblationCase[] = [];
  const growth: AblationFigure['growth'] = [];

  // The demo: a trained classifier with targets.csv (cost = drop of the target outputs).
  const demoModel = path.join(repoRoot, 'sample-data/tiles-model.onnx');
  const demoProbes = path.join(repoRoot, 'sample-data/tiles');
  const demoStudy = path.join(work, 'demo.study');
  fs.rmSync(demoStudy, { force: true });
  await runScan({ model: demoModel, probes: demoProbes, study: demoStudy });
  for (const layer of ['relu_conv1', 'relu_narrow', 'relu_wide']) {
    cases.push(await measureLayer(demoStudy, demoModel, demoProbes, 'demo tiles classifier', layer, sizes.reps));
    log(`demo ${layer}: ${JSON.stringify(cases.at(-1))}`);
  }

  // A wider CNN with random labels and no targets (cost = L2 change of the logits).
  const [size, c1, c2, fc] = sizes.cnn;
  const m = cnn(size, c1, c2, fc);
  const modelFile = path.join(work, 'cnn.onnx');
  fs.writeFileSync(modelFile, m.bytes);
  const probesDir = path.join(work, 'cnn-probes');
  fs.rmSync(probesDir, { recursive: true, force: true });
  writeProbeSet(probesDir, m.inputName, m.rowShape, sizes.probes, 30, 7);
  const study = path.join(work, 'cnn.study');
  fs.rmSync(study, { force: true });
  await runScan({ model: modelFile, probes: probesDir, study, layers: ['r1', 'r2', 'r3'] });
  for (const layer of ['r1', 'r2', 'r3']) {
    cases.push(await measureLayer(study, modelFile, probesDir, m.description, layer, sizes.reps));
    log(`cnn ${layer}: ${JSON.stringify(cases.at(-1))}`);
  }
  for (const fraction of [0.25, 0.5, 1]) {
    const n = Math.round(sizes.probes * fraction);
    const c = await measureLayer(study, modelFile, probesDir, m.description, 'r2', sizes.reps, n < sizes.probes ? n : undefined);
    growth.push({ model: m.description, layer: 'r2', probes: n, perUnitSeconds: c.perUnitSeconds, plainSeconds: c.plainSeconds, ratio: c.ratio });
    log(`growth r2 @ ${n}: ${JSON.stringify(growth.at(-1))}`);
  }
  const unitsGrowth: AblationFigure['unitsGrowth'] = [];
  const db = openStudyDb(study);
  try {
    const layerUnits = fc;
    for (const k of [layerUnits / 4, layerUnits / 2, layerUnits]) {
      const times: number[] = [];
      for (let r = 0; r < sizes.reps; r++) {
        clearAblations(db);
        const t = performance.now();
        await ablateLayer(db, { model: modelFile, layer: 'r3', mode: 'zero' }, {}, Array.from({ length: k }, (_, u) => u));
        times.push((performance.now() - t) / 1000);
      }
      unitsGrowth.push({ layer: 'r3', units: k, seconds: median(times) });
      log(`units growth r3 @ ${k}: ${JSON.stringify(unitsGrowth.at(-1))}`);
    }
  } finally {
    db.close();
  }
  return { cases, growth, unitsGrowth };
}
