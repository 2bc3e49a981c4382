import path from 'node:path';
import crypto from 'node:crypto';
import { stringify } from 'csv-stringify/sync';
import { SkeinError, isSkeinError, type ErrorInfo } from '../errors.ts';
import { readModel } from '../model/index.ts';
import { openProbeSet, writeNpyFloat32 } from '../probes/index.ts';
import { extract, type ScanHooks } from '../extract/scan.ts';
import { scoreStudyAsync } from '../score/job.ts';
import { openStudyDb, withStudyDb } from '../store/study.ts';
import { requireBinding, readLayers, findLayer, labelNames } from '../store/binding.ts';
import { readLayerChunk } from '../store/activations.ts';
import { hasScores } from '../store/scores.ts';
import { lockStudy, withStudyLock } from '../store/lock.ts';
import { writeFileDurably } from '../fs/index.ts';
import { rankRows, unitDetail } from './screens/read-models.ts';
import { createScreenApi } from './screens/index.ts';
import { createFileApi } from './files.ts';
import { createReviewApi } from './review.ts';
import { checkPaths, type ApiContext } from './context.ts';
import { createAblationApi } from './ablation.ts';
import { createLensApi } from './lens.ts';
import { requests, type Method, type Request, type JobState, type ScanResult, type StudySummary, type ProbeSummary, type ExportResult } from './contract.ts';

export { requests };
export type * from './contract.ts';
export { checkPaths, PATH_FIELDS, type ApiContext } from './context.ts';

/** Validates a request body against its schema; the error names the field at fault. */
export function parseRequest<M extends Method>(method: M, body: unknown): Request<M> {
  const schema = requests[method];
  if (!schema) throw new SkeinError({ code: 'request', where: 'method', message: `Unknown request "${String(method)}".` });
  const r = schema.safeParse(body);
  if (!r.success) {
    const issue = r.error.issues[0];
    throw new SkeinError({ code: 'request', where: issue.path.join('.') || '(body)', message: `Invalid request ${method}: ${issue.message}.` });
  }
  return r.data as Request<M>;
}

export function toErrorInfo(e: unknown): ErrorInfo {
  if (isSkeinError(e)) return e.toJSON();
  return { code: 'io', message: `Unexpected failure: ${(e as Error)?.message ?? String(e)}. Please report it with the steps that led here.` };
}

/** Runs extraction then scoring, holding the study's writer lock. Used directly by the CLI and through jobs by the screens. */
export async function runScan(req: Request<'scan.start'>, hooks: ScanHooks = {}, ctx: ApiContext = {}): Promise<ScanResult> {
  return withStudyLock(req.study, 'scan', () => scanLocked(req, hooks, ctx));
}

async function scanLocked(req: Request<'scan.start'>, hooks: ScanHooks, ctx: ApiContext): Promise<ScanResult> {
  const ex = await extract(req, { ...hooks, nativeBinding: ctx.nativeBinding });
  const db = openStudyDb(req.study, { nativeBinding: ctx.nativeBinding });
  try {
    const sc = await scoreStudyAsync(db, {}, { onProgress: hooks.onProgress, signal: hooks.signal });
    return {
      study: ex.study, probes: ex.probes, layers: ex.layers, chunksComputed: ex.chunksComputed, chunksReused: ex.chunksReused,
      resumed: ex.resumed, scoresReused: sc.reused, extractSeconds: ex.seconds, scoreSeconds: sc.seconds,
    };
  } finally {
    db.close();
  }
}

/** Creates the API object: one method per request, each taking the validated request. */
export function createApi(ctx: ApiContext = {}) {
  const jobs = new Map<string, { state: JobState; abort: AbortController }>();
  const withStudy = <T>(file: string, fn: (db: ReturnType<typeof openStudyDb>) => T): T => withStudyDb(file, { nativeBinding: ctx.nativeBinding }, fn);

  const api = {
    'model.layers': async (r: Request<'model.layers'>) => readModel(r.model),

    'probes.inspect': async (r: Request<'probes.inspect'>): Promise<ProbeSummary> => {
      const p = openProbeSet(r.probes);
      const counts = new Array(p.labels.length).fill(0);
      for (const id of p.labelIds) counts[id]++;
      return {
        dir: p.dir, name: p.name, fingerprint: p.fingerprint, count: p.count,
        inputs: p.inputs.map((i) => ({ name: i.name, dtype: i.dtype, rowShape: i.rowShape })),
        labels: p.labels.map((name, i) => ({ name, count: counts[i] })),
        concepts: p.concepts?.length ?? 0, examples: p.examples?.length ?? 0, warnings: p.warnings,
      };
    },

    'scan.start': async (r: Request<'scan.start'>): Promise<{ job: string }> => {
      // One writer per study: a second scan is refused here, naming the running job.
      const lock = lockStudy(r.study, 'scan');
      const id = crypto.randomUUID();
      const abort = new AbortController();
      const state: JobState = { job: id, state: 'running', progress: null, notes: [], error: null, result: null };
      jobs.set(id, { state, abort });
      scanLocked(r, { signal: abort.signal, onProgress: (p) => { state.progress = p; }, onNote: (m) => state.notes.push(m) }, ctx)
        .finally(() => lock.release())
        .then((result) => { state.result = result; state.state = 'done'; })
        .catch((e) => { state.error = toErrorInfo(e); state.state = isSkeinError(e) && e.code === 'cancelled' ? 'cancelled' : 'failed'; });
      return { job: id };
    },

    'job.get': async (r: Request<'job.get'>): Promise<JobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No job ${r.job}; it may belong to an earlier session. Start the scan again (it resumes).` });
      return j.state;
    },

    'job.cancel': async (r: Request<'job.cancel'>): Promise<JobState> => {
      const j = jobs.get(r.job);
      if (!j) throw new SkeinError({ code: 'request', where: 'job', message: `No job ${r.job}.` });
      j.abort.abort();
      return j.state;
    },

    'study.summary': async (r: Request<'study.summary'>): Promise<StudySummary> => withStudy(r.study, (db) => {
      const binding = requireBinding(db, path.resolve(r.study));
      const scored = hasScores(db);
      return {
        file: path.resolve(r.study),
        model: { path: binding.modelPath, fingerprint: binding.modelFp },
        probes: { dir: binding.probesDir, name: binding.probesName, fingerprint: binding.probesFp, count: binding.probeCount },
        layers: readLayers(db).map((l) => ({ name: l.name, op: l.op, kind: l.kind, units: l.units, pool: l.pool, dims: l.dims })),
        labels: labelNames(db), scored, createdAt: binding.createdAt, updatedAt: binding.updatedAt,
      };
    }),

    'study.rank': async (r: Request<'study.rank'>) => withStudy(r.study, (db) => rankRows(db, { layer: r.layer, top: r.top, file: r.study })),

    'unit.detail': async (r: Request<'unit.detail'>) => withStudy(r.study, (db) => unitDetail(db, r.layer, r.unit, r.study)),

    'export.scores': async (r: Request<'export.scores'>): Promise<ExportResult> => {
      const rows = await api['study.rank']({ study: r.study });
      const ext = path.extname(r.out).toLowerCase();
      let text: string;
      if (ext === '.json') text = JSON.stringify(rows, null, 1) + '\n';
      else if (ext === '.csv') {
        // list columns are ";"-separated in driver order (a compound's label contains spaces and "&")
        text = stringify(rows.map((u) => [u.layer, u.unit, u.conceptCount, u.selectivity, u.flags.join(' '),
          u.drivers.map((d) => `${d.label}:${d.share.toFixed(4)}`).join('; '), u.drivers.map((d) => d.auroc.toFixed(4)).join('; '),
          u.drivers.map((d) => d.q.toExponential(3)).join('; '), u.explanation?.formula ?? '', u.explanation?.iou ?? '',
          u.conceptLow, u.conceptHigh, u.drivers.map((d) => `${d.shareLow.toFixed(4)}-${d.shareHigh.toFixed(4)}`).join('; '),
          u.drivers.map((d) => d.effect.toPrecision(4)).join('; '), u.modulators.map((m) => `${m.label} (of ${m.of})`).join('; '),
          u.nested.map((x) => `${x.label} (within ${x.within})`).join('; '), u.explanation?.threshold ?? '']),
        { header: true, columns: ['layer', 'unit', 'concept_count', 'selectivity', 'flags', 'drivers', 'driver_auroc', 'driver_q', 'explanation', 'explanation_iou',
          'concept_low', 'concept_high', 'driver_share_interval', 'driver_effect', 'modulators', 'nested', 'explanation_threshold'] });
      } else {
        throw new SkeinError({ code: 'request', file: r.out, message: 'Scores export needs a .csv or .json file name.' });
      }
      writeFileDurably(r.out, text);
      return { file: path.resolve(r.out), rows: rows.length, columns: ext === '.csv' ? 17 : 11 };
    },

    'export.activations': async (r: Request<'export.activations'>): Promise<ExportResult> => withStudy(r.study, (db) => {
      const binding = requireBinding(db, r.study, 'This study has no scan yet.');
      const layer = findLayer(db, r.layer, r.study);
      if (path.extname(r.out).toLowerCase() !== '.npy') throw new SkeinError({ code: 'request', file: r.out, message: 'Activations export needs a .npy file name.' });
      // Probe-major rows for numpy, built chunk by chunk from unit-major storage: memory is units × chunk size.
      function* blocks(): Generator<Float32Array> {
        for (let c = 0; c * binding.chunkSize < binding.probeCount; c++) {
          const length = Math.min(binding.chunkSize, binding.probeCount - c * binding.chunkSize);
          const cols = readLayerChunk(db, layer.id, c);
          if (cols.length !== layer.units) throw new SkeinError({ code: 'study', file: r.study, where: `layer ${layer.name}`, message: 'The scan of this layer is incomplete. Run the scan again to finish it.' });
          const block = new Float32Array(length * layer.units);
          for (let u = 0; u < layer.units; u++) for (let p = 0; p < length; p++) block[p * layer.units + u] = cols[u][p];
          yield block;
        }
      }
      writeNpyFloat32(path.resolve(r.out), [binding.probeCount, layer.units], blocks());
      return { file: path.resolve(r.out), rows: binding.probeCount, columns: layer.units };
    }),
  };
  return { ...api, ...createScreenApi(ctx), ...createFileApi(ctx), ...createReviewApi(ctx), ...createAblationApi(ctx), ...createLensApi(ctx) };
}

export type Api = ReturnType<typeof createApi>;

/** Validates and runs one request: what every transport calls. */
export async function dispatch(api: Api, ctx: ApiContext, method: string, body: unknown): Promise<unknown> {
  if (!Object.hasOwn(requests, method)) throw new SkeinError({ code: 'request', where: 'method', message: `Unknown request "${method}".` });
  const m = method as Method;
  const req = parseRequest(m, body);
  checkPaths(req as Record<string, unknown>, ctx.allowedRoots);
  return (api[m] as (r: unknown) => Promise<unknown>)(req);
}
