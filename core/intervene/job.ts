/**
 * Ablation as work on a study: one unit on demand (every label gets a full bootstrap interval), or every unit of a
 * layer one at a time (the bulk pass: p-values for every label, an interval for the largest effect only), each unit's
 * cost committed on its own so a cancelled or killed pass resumes where it stopped.
 */
import type Database from 'better-sqlite3';
import { SkeinError } from '../errors.ts';
import { Progress, type ProgressReport } from '../extract/progress.ts';
import { ensureAblationRun, doneAblationUnits, writeAblationUnits, type AblationRunRow, type AblationUnitRow } from '../store/ablation.ts';
import { Ablator, type AblationSetup } from './run.ts';
import type { UnitCost, CostOptions } from './effects.ts';

/** Resamples per interval: a unit's own check, and the bulk pass (largest effect only). */
export const UNIT_REPS = 2000;
export const BULK_REPS = 200;

export interface AblateHooks {
  onProgress?: (p: ProgressReport) => void;
  onNote?: (message: string) => void;
  signal?: AbortSignal;
  /** After each unit's cost is committed (not throttled like progress). */
  onUnit?: (unit: number, cost: UnitCost) => void;
}

function runRow(db: Database.Database, a: Ablator): AblationRunRow {
  const { run, layer, setup, baseline, plan, key } = a.ctx;
  const sampled = baseline.probes.length < run.probeCount;
  return ensureAblationRun(db, {
    key, modelFp: run.modelFp, probesFp: run.probesFp, layer: layer.name, mode: setup.mode,
    value: setup.mode === 'value' ? setup.value! : null, sample: sampled ? baseline.probes.length : null,
    seed: setup.seed, probes: baseline.probes.length, metric: plan.metric, floor: plan.floor, output: a.output, units: layer.units,
  });
}

function unitRow(runId: number, unit: number, cost: UnitCost): Omit<AblationUnitRow, 'at'> {
  return {
    runId, unit, hurtCount: cost.hurt.length, conceptsHurt: cost.conceptsHurt,
    largestLabel: cost.largest?.label ?? null, largestMean: cost.largest?.mean ?? null, reps: cost.reps, cost: JSON.stringify(cost),
  };
}

/**
 * Units are committed in groups at most this far apart: a durable commit (fsync) per unit cost more than a
 * small layer's ablation itself (measured: bench, ablation figure); a kill loses at most this much work.
 */
const COMMIT_EVERY_MS = 500;

/** Ablates one unit with full intervals and stores the result. */
export async function ablateUnit(db: Database.Database, setup: AblationSetup, unit: number, studyFile?: string): Promise<{ run: AblationRunRow; cost: UnitCost }> {
  const a = await Ablator.open(db, setup, studyFile);
  try {
    const cost = await a.cost([unit], { reps: UNIT_REPS, intervals: 'all', seed: a.ctx.setup.seed });
    const run = runRow(db, a);
    writeAblationUnits(db, [unitRow(run.id, unit, cost)]);
    return { run, cost };
  } finally {
    await a.release();
  }
}

export interface LayerSummary {
  run: AblationRunRow; computed: number; reused: number; seconds: number;
  /** Wall and CPU (this process, all threads) seconds per computed unit, the loop alone (not the one-off passes). */
  perUnitSeconds: number; perUnitCpuSeconds: number;
}

/** Ablates every unit of the layer (or `units`), one at a time, skipping those already stored for this setup. */
export async function ablateLayer(db: Database.Database, setup: AblationSetup, hooks: AblateHooks = {}, units?: number[], studyFile?: string): Promise<LayerSummary> {
  const started = performance.now();
  const a = await Ablator.open(db, setup, studyFile);
  try {
    const run = runRow(db, a);
    const all = units ?? Array.from({ length: a.ctx.layer.units }, (_, u) => u);
    const done = doneAblationUnits(db, run.id);
    const todo = all.filter((u) => !done.has(u));
    if (todo.length < all.length && todo.length > 0) hooks.onNote?.(`Resuming: ${all.length - todo.length} of ${all.length} units are already in the study.`);
    const progress = new Progress('ablate', all.length, hooks.onProgress, all.length - todo.length);
    const opts: CostOptions = { reps: BULK_REPS, intervals: 'largest', seed: a.ctx.setup.seed };
    const loopStart = performance.now();
    const loopCpu = process.cpuUsage();
    let pending: Omit<AblationUnitRow, 'at'>[] = [];
    let lastCommit = performance.now();
    const commit = () => { writeAblationUnits(db, pending); pending = []; lastCommit = performance.now(); };
    try {
      for (const u of todo) {
        if (hooks.signal?.aborted) {
          throw new SkeinError({ code: 'cancelled', message: 'Ablation cancelled. Finished units are saved; run it again to resume.' });
        }
        const cost = await a.cost([u], opts);
        pending.push(unitRow(run.id, u, cost));
        if (performance.now() - lastCommit >= COMMIT_EVERY_MS) commit();
        progress.advance(1);
        hooks.onUnit?.(u, cost);
      }
    } finally {
      commit(); // also on cancel or failure: finished units are kept
    }
    progress.finish();
    const loop = (performance.now() - loopStart) / 1000;
    const cpu = process.cpuUsage(loopCpu);
    const loopCpuSeconds = (cpu.user + cpu.system) / 1e6;
    return { run: runRow(db, a), computed: todo.length, reused: all.length - todo.length, seconds: (performance.now() - started) / 1000, perUnitSeconds: todo.length ? loop / todo.length : 0, perUnitCpuSeconds: todo.length ? loopCpuSeconds / todo.length : 0 };
  } finally {
    await a.release();
  }
}
