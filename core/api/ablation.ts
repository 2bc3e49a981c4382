/**
 * What removing a unit costs (core/intervene) as requests: one unit on demand, a layer in bulk as a job with
 * progress, cancel and resume, and the stored results for the unit page, the layer view and the roster.
 */
import crypto from 'node:crypto';
import type { z } from 'zod';
import { checkStoredPath, type ApiContext } from './context.ts';
import type { ablationRequests } from './requests/ablation.ts';
import { SkeinError, isSkeinError, type ErrorInfo } from '../errors.ts';
import { openStudyDb, withStudyDb } from '../store/study.ts';
import { withStudyLock } from '../store/lock.ts';
import { readBinding, findLayer } from '../store/binding.ts';
import { hasScores } from '../store/scores.ts';
import { rankRows } from './screens/read-models.ts';
import { ablationRuns, ablationUnits, latestAblationUnit, rosterAblationCosts, type AblationRunRow, type AblationUnitRow } from '../store/ablation.ts';
import { ablateUnit, ablateLayer, type LayerSummary, type AblateHooks } from '../intervene/job.ts';
import { compareDriversAndCost, type Comparison } from '../intervene/compare.ts';
import type { UnitCost } from '../intervene/effects.ts';
import type { ProgressReport } from '../extract/progress.ts';

type Req<K extends keyof typeof ablationRequests> = z.infer<(typeof ablationRequests)[K]>;

export const ABLATION_CAUTION = 'Ablation costs are measured on this probe set with this replacement; they are hypotheses about the model, not proof. Check the unit and retest the pruned or edited model before relying on it.';

export interface AblationRunInfo {
  id: number; layer: string; mode: string; value: number | null; sample: number | null; seed: number; probes: number;
  metric: string; floor: number; output: string; units: number; done: number; updatedAt: string;
}

export interface UnitAblationView {
  layer: string; unit: number;
  run: AblationRunInfo;
  cost: UnitCost;
  drivers: string[];
  comparison: Comparison;
  caution: string;
}

export interface LayerAblationRow { unit: number; hurtCount: number; conceptsHurt: number; largestLabel: string | null; largestMean: number | null; hurt: string[]; drivers: string[]; driverConcepts: number | null }
export interface LayerAblationView { layer: string; units: number; runs: AblationRunInfo[]; run: AblationRunInfo | null; rows: LayerAblationRow[]; caution: string }

export interface AblateJobState {
  job: string; state: 'running' | 'done' | 'failed' | 'cancelled';
  layer: string; progress: ProgressReport | null; notes: string[]; error: ErrorInfo | null; result: (Omit<LayerSummary, 'run'> & { run: AblationRunInfo }) | null;
}

const runInfo = (r: AblationRunRow): AblationRunInfo => ({
  id: r.id, layer: r.layer, mode: r.mode, value: r.value, sample: r.sample, seed: r.seed, probes: r.probes, metric: r.metric,
  floor: r.floor, output: r.output, units: r.units, done: r.done, updatedAt: r.updatedAt,
});

function driversOf(db: Parameters<typeof rankRows>[0], layer: string, file: string): Map<number, { labels: string[]; concepts: number }> {
  const scored = hasScores(db);
  if (!scored) return new Map();
  return new Map(rankRows(db, { layer, file }).map((r) => [r.unit, { labels: r.drivers.map((d) => d.label), concepts: r.conceptCount }]));
}

function unitView(db: Parameters<typeof rankRows>[0], file: string, layer: string, unit: number, run: AblationRunRow, row: Pick<AblationUnitRow, 'cost'>): UnitAblationView {
  const cost = JSON.parse(row.cost) as UnitCost;
  const drivers = driversOf(db, layer, file).get(unit)?.labels ?? [];
  return { layer, unit, run: runInfo(run), cost, drivers, comparison: compareDriversAndCost(drivers, cost.hurt), caution: ABLATION_CAUTION };
}

/** Bulk ablation of a layer in this process (the CLI's --all; the API's job runs the same). */
export async function runAblateLayer(r: Req<'ablate.start'>, hooks: AblateHooks, ctx: ApiContext = {}): Promise<LayerSummary> {
  return withStudyLock(r.study, 'removal-cost run', () => ablateLayerLocked(r, hooks, ctx));
}

async function ablateLayerLocked(r: Req<'ablate.start'>, hooks: AblateHooks, ctx: ApiContext): Promise<LayerSummary> {
  const db = openStudyDb(r.study, { nativeBinding: ctx.nativeBinding });
  try {
    const study = readBinding(db);
    if (!study) throw new SkeinError({ code: 'study', file: r.study, message: 'This study has no scan yet. Scan the model first.' });
    return await ablateLayer(db, { model: r.model ?? study.modelPath, layer: r.layer, mode: r.mode ?? 'zero', value: r.value, sample: r.sample, seed: r.seed }, hooks, undefined, r.study);
  } finally {
    db.close();
  }
}

/** The model path a study stored, refused in browser mode when it lies outside the allowed folders. */
function storedModel(modelPath: string, study: string, ctx: ApiContext): string {
  checkStoredPath(modelPath, 'model file', study, ctx.allowedRoots);
  return modelPath;
}

export function createAblationApi(ctx: ApiContext) {
  const jobs = new Map<string, { state: AblateJobState; abort: AbortController }>();
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);
  const fps = (db: ReturnType<typeof openStudyDb>, file: string) => {
    const run = readBinding(db);
    if (!run) throw new SkeinError({ code: 'study', file, message: 'This study has no scan yet. Scan the model first.' });
    return run;
  };
  const setupOf = (r: Req<'ablate.start'>, modelPath: string) => ({
    model: r.model ?? storedModel(modelPath, r.study, ctx), layer: r.layer, mode: r.mode ?? 'zero', value: r.value, sample: r.sample, seed: r.seed,
  });

  return {
    'ablate.unit': async (r: Req<'ablate.unit'>): Promise<UnitAblationView> => {
      const db = openStudyDb(r.study, { nativeBinding: ctx.nativeBinding });
      try {
        const study = fps(db, r.study);
        const layer = findLayer(db, r.layer, r.study);
        if (r.unit >= layer.units) throw new SkeinError({ code: 'request', where: 'unit', message: `Layer "${layer.name}" has units 0 to ${layer.units - 1}; there is no unit ${r.unit}.` });
        const { run, cost } = await ablateUnit(db, setupOf(r, study.modelPath), r.unit, r.study);
        return unitView(db, r.study, layer.name, r.unit, ablationRuns(db, study, layer.name).find((x) => x.id === run.id) ?? run, { cost: JSON.stringify(cost) });
      } finally {
        db.close();
      }
    },

    'ablate.cached': async (r: Req<'ablate.cached'>): Promise<UnitAblationView | null> => withStudy(r.study, (db) => {
      const study = fps(db, r.study);
      const layer = findLayer(db, r.layer, r.study);
      const hit = latestAblationUnit(db, study, layer.name, r.unit);
      return hit ? unitView(db, r.study, layer.name, r.unit, hit.run, hit.row) : null;
    }),

    'ablate.start': async (r: Req<'ablate.start'>): Promise<{ job: string }> => {
      const modelPath = withStudy(r.study, (db) => { const s = fps(db, r.study); findLayer(db, r.layer, r.study); return s.modelPath; });
      const id = crypto.randomUUID();
      const abort = new AbortController();
      const state: AblateJobState = { job: id, state: 'running', layer: r.layer, progress: null, notes: [], error: null, result: null };
      jobs.set(id, { state, abort });
      runAblateLayer({ ...r, model: r.model ?? storedModel(modelPath, r.study, ctx) }, { signal: abort.signal, onProgress: (p) => { state.progress = p; }, onNote: (m) => state.notes.push(m) }, ctx).then((s) => {
        state.result = { ...s, run: runInfo(s.run) };
        state.state = 'done';
      }).catch((e) => {
        state.error = isSkeinError(e) ? e.toJSON() : { code: 'io', message: `Unexpected failure: ${(e as Error)?.message ?? String(e)}.` };
        state.state = isSkeinError(e) && e.code === 'cancelled' ? 'cancelled' : 'failed';
      });
      return { job: id };
    },

    'ablate.job': async (r: Req<'ablate.job'>): Promise<AblateJobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No ablation job ${r.job}; it may belong to an earlier session. Start it again: finished units are kept.` });
      return j.state;
    },

    'ablate.cancel': async (r: Req<'ablate.cancel'>): Promise<AblateJobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No ablation job ${r.job}.` });
      j.abort.abort();
      return j.state;
    },

    'ablate.layer': async (r: Req<'ablate.layer'>): Promise<LayerAblationView> => withStudy(r.study, (db) => {
      const study = fps(db, r.study);
      const layer = findLayer(db, r.layer, r.study);
      const runs = ablationRuns(db, study, layer.name);
      const chosen = r.run ? runs.find((x) => x.id === r.run) : [...runs].sort((a, b) => b.done - a.done || (a.updatedAt < b.updatedAt ? 1 : -1))[0];
      if (r.run && !chosen) throw new SkeinError({ code: 'request', where: 'run', message: `No ablation run ${r.run} for layer "${layer.name}".` });
      const drivers = driversOf(db, layer.name, r.study);
      const rows = chosen ? ablationUnits(db, chosen.id).map((u) => {
        const cost = JSON.parse(u.cost) as UnitCost;
        const d = drivers.get(u.unit);
        return { unit: u.unit, hurtCount: u.hurtCount, conceptsHurt: u.conceptsHurt, largestLabel: u.largestLabel, largestMean: u.largestMean, hurt: cost.hurt, drivers: d?.labels ?? [], driverConcepts: d?.concepts ?? null };
      }) : [];
      rows.sort((a, b) => b.conceptsHurt - a.conceptsHurt || b.hurtCount - a.hurtCount || (b.largestMean ?? 0) - (a.largestMean ?? 0) || a.unit - b.unit);
      return { layer: layer.name, units: layer.units, runs: runs.map(runInfo), run: chosen ? runInfo(chosen) : null, rows, caution: ABLATION_CAUTION };
    }),

    'ablate.roster': async (r: Req<'ablate.roster'>): Promise<{ layer: string; mode: string; units: number[]; conceptsHurt: number[]; hurtCount: number[] }[]> => withStudy(r.study, (db) => {
      const study = fps(db, r.study);
      return [...rosterAblationCosts(db, study)].map(([layer, v]) => {
        const units = [...v.units.keys()].sort((a, b) => a - b);
        return { layer, mode: v.mode, units, conceptsHurt: units.map((u) => v.units.get(u)!.conceptsHurt), hurtCount: units.map((u) => v.units.get(u)!.hurtCount) };
      });
    }),
  };
}

export type { UnitCost, LabelCost } from '../intervene/effects.ts';
export type { Comparison } from '../intervene/compare.ts';
