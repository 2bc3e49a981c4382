/**
 * Running ablations over a study's probe set: the upstream pass once, the unmodified downstream pass once (the
 * baseline), then one downstream pass per ablation. Everything per probe stays in typed arrays.
 */
import crypto from 'node:crypto';
import fs from 'node:fs';
import type Database from 'better-sqlite3';
import * as ort from 'onnxruntime-node';
import { SkeinError } from '../errors.ts';
import { readModel, createSession } from '../model/index.ts';
import { openProbeSet, resolveFillShapes } from '../probes/index.ts';
import type { ProbeSet } from '../probes/types.ts';
import { Feeder, fixedBatch } from '../extract/scan.ts';
import { readBinding, findLayer, labelNames, readConcepts, readRelatednessOverride, type LayerRow, type StudyBinding } from '../store/binding.ts';
import { readLabelMatrix } from '../score/job.ts';
import { buildRelatedness } from '../score/relatedness.ts';
import { mulberry32, shuffle } from '../random.ts';
import { cutAt, unitSlice, type CutModel } from './surgery.ts';
import { readTargets, type Targets } from './targets.ts';
import { planHarm, probeHarm, labelIndex, labelCosts, type Baseline, type HarmPlan, type LabelIndex, type UnitCost, type CostOptions } from './effects.ts';

export type AblationMode = 'zero' | 'mean' | 'value';

export interface AblationSetup {
  /** The model file; must be the one the study was scanned with (checked by fingerprint). */
  model: string;
  layer: string;
  mode: AblationMode;
  /** The replacement for mode 'value'. */
  value?: number;
  /** Probes to use: a seeded sample of this size (all probes when absent or ≥ the probe count). */
  sample?: number;
  seed?: number;
  /** Probes per downstream run (a fixed-batch model uses its own). */
  batch?: number;
  threads?: number;
}

export const DEFAULT_SEED = 1;
const DEFAULT_RUN_BATCH = 512;
/** Upper bound on the cached tensors the downstream part reads (per probe × probes). */
const MAX_CACHE_BYTES = 1 << 30;

type Cached = Float32Array | Float64Array | BigInt64Array | Int32Array | Uint8Array;

/** A probe set seen through a list of probe indices, so core/extract's Feeder reads exactly those rows. */
function probeView(probes: ProbeSet, indices: Int32Array): ProbeSet {
  const inputs = probes.inputs.map((src) => ({
    ...src,
    readRows: (start: number, count: number) => {
      const rows = Array.from(indices.subarray(start, start + count), (i) => src.readRows(i, 1));
      const out = new (rows[0].constructor as { new (n: number): Cached })(rows.reduce((s, r) => s + r.length, 0));
      let at = 0;
      for (const r of rows) { (out as Float32Array).set(r as Float32Array, at); at += r.length; }
      return out;
    },
  }));
  return { ...probes, count: indices.length, inputs };
}

/** Seeded sample of `size` probe indices out of `count`, ascending; every probe when size is absent or large. */
export function sampleProbes(count: number, size: number | undefined, seed: number): Int32Array {
  const all = new Int32Array(count);
  for (let i = 0; i < count; i++) all[i] = i;
  if (!size || size >= count) return all;
  shuffle(all, mulberry32(seed));
  return all.slice(0, size).sort();
}

export interface AblationContext {
  run: StudyBinding;
  layer: LayerRow;
  cut: CutModel;
  baseline: Baseline;
  plan: HarmPlan;
  index: LabelIndex;
  similarity: Float64Array;
  targets: Targets | null;
  /** Per-unit mean of the layer over the probes used (whole map / every position), for mean ablation. */
  unitMeans: Float64Array;
  /** Identifies the setup: what a cached result depends on. */
  key: string;
  setup: Required<Pick<AblationSetup, 'mode' | 'seed'>> & AblationSetup;
  /** Seconds spent in the upstream pass and the baseline pass (the one-off cost of a run). */
  timing: { upstream: number; baseline: number };
}

/** Prepares ablations of one layer of a study: checks, cuts the model, runs upstream and the baseline. */
export class Ablator {
  private constructor(
    readonly ctx: AblationContext,
    private readonly session: ort.InferenceSession,
    private readonly cache: Map<string, { data: Cached; perProbe: number; dims: number[]; type: ort.Tensor.Type }>,
    private readonly batch: number,
    private readonly fixed: number | null,
    readonly output: string,
  ) {}

  static async open(db: Database.Database, setup: AblationSetup, studyFile?: string): Promise<Ablator> {
    const run = readBinding(db);
    if (!run) throw new SkeinError({ code: 'study', file: studyFile, message: 'This study has no scan yet. Scan the model first (skein scan).' });
    const layer = findLayer(db, setup.layer, studyFile);
    const info = readModel(setup.model);
    if (info.fingerprint !== run.modelFp) {
      throw new SkeinError({ code: 'model', file: info.path, message: `This is not the model the study was scanned with (the study's is ${run.modelPath}). Give that model, or rescan the study with this one.` });
    }
    if (!fs.existsSync(run.probesDir)) {
      throw new SkeinError({ code: 'probes', file: run.probesDir, message: 'The study\'s probe-set folder is gone; ablation reruns the model on the probes. Put the folder back or rescan the study from its new place.' });
    }
    const probes = openProbeSet(run.probesDir);
    if (probes.fingerprint !== run.probesFp) {
      throw new SkeinError({ code: 'probes', file: probes.dir, message: 'The probe set changed since the study was scanned. Rescan the study before ablating.' });
    }
    if (setup.mode === 'value' && !Number.isFinite(setup.value)) {
      throw new SkeinError({ code: 'request', where: 'value', message: 'Mode "value" needs the replacement value (a finite number).' });
    }
    const seed = setup.seed ?? DEFAULT_SEED;
    const indices = sampleProbes(probes.count, setup.sample, seed);
    const cut = cutAt(fs.readFileSync(info.path), layer.name, { modelPath: info.path });

    const fed = info.inputs.filter((i) => probes.inputs.some((s) => s.name === i.name) || i.name in probes.fill);
    const fixed = fixedBatch(fed);
    const batch = fixed ?? Math.max(1, setup.batch ?? DEFAULT_RUN_BATCH);
    // Every probe: read them in order as the scan does; a sample: through a view of the chosen rows.
    const feeder = new Feeder(info, indices.length === probes.count ? probes : probeView(probes, indices), resolveFillShapes(probes, info.inputs), fixed);

    // Upstream: once per probe, keeping every tensor the downstream part reads.
    const t0 = performance.now();
    const cache = new Map<string, { data: Cached; perProbe: number; dims: number[]; type: ort.Tensor.Type }>();
    const up = await createSession(cut.upstream, { intraOpThreads: setup.threads }, info.path);
    try {
      const n = indices.length;
      for (let off = 0; off < n; off += batch) {
        const count = Math.min(batch, n - off);
        const feeds = feeder.feeds(off, count);
        const cachedNames = cut.frontier.filter((f) => f.source === 'cached').map((f) => f.name);
        const out = cachedNames.length ? await up.run(feeds, cachedNames) : {};
        for (const f of cut.frontier) {
          const t = f.source === 'cached' ? out[f.name] : feeds[f.name];
          const rows = t.dims[0];
          if (t.dims.length === 0 || rows !== (fixed ?? count)) {
            throw new SkeinError({ code: 'model', file: info.path, where: `tensor ${f.name}`, message: `The part of the model after "${layer.name}" reads "${f.name}", which has no per-probe batch axis (shape [${t.dims.join(', ')}]), so Skein cannot replay it probe by probe. Ablate another layer.` });
          }
          const perProbe = t.size / rows;
          let entry = cache.get(f.name);
          if (!entry) {
            if (perProbe * n * 8 > MAX_CACHE_BYTES) {
              throw new SkeinError({ code: 'request', where: 'sample', message: `Layer "${layer.name}" needs ${Math.round((perProbe * n * 4) / 2 ** 20)} MiB of cached tensors over ${n} probes. Ablate on a sample (--sample N) of fewer probes.` });
            }
            const Ctor = (t.data as Cached).constructor as { new (k: number): Cached };
            entry = { data: new Ctor(perProbe * n), perProbe, dims: [...t.dims.slice(1)], type: t.type };
            cache.set(f.name, entry);
          }
          (entry.data as Float32Array).set((t.data as Float32Array).subarray(0, perProbe * count), off * perProbe);
        }
      }
    } finally {
      await up.release();
    }
    const upstreamSeconds = (performance.now() - t0) / 1000;

    const session = await createSession(cut.downstream, { intraOpThreads: setup.threads }, info.path);
    const outputs = info.outputs.map((o) => ({ name: o.name, size: (o.dims ?? []).slice(1).reduce<number>((a, d) => a * (typeof d === 'number' ? d : NaN), 1) }));
    const probesTargets = readTargets(probes.dir, probes.count, outputs.map((o) => ({ name: o.name, size: Number.isNaN(o.size) ? 2 : o.size })));
    const outputName = probesTargets?.output ?? cut.outputs[0];

    const labels = readLabelMatrix(db, run);
    const index = labelIndex(labels.labels, labels.labelOffsets, labels.labelIds, indices);
    const similarity = buildRelatedness(labelNames(db), labels, readConcepts(db), readRelatednessOverride(db)).matrix;

    const target = cache.get(layer.name)!;
    const unitMeans = meansPerUnit(target.data as Float32Array, indices.length, layer);
    const targetsForSample = probesTargets ? restrictTargets(probesTargets, indices) : null;
    const key = crypto.createHash('sha256').update(JSON.stringify({
      v: 1, m: run.modelFp, p: run.probesFp, l: layer.name, mode: setup.mode, value: setup.mode === 'value' ? setup.value : null,
      sample: indices.length === probes.count ? null : indices.length, seed: indices.length === probes.count ? null : seed,
      t: probesTargets?.fingerprint ?? null,
    })).digest('hex');

    // The baseline is the same downstream graph fed the untouched tensor: the same kernels as every ablation.
    const ablator = new Ablator(
      { run, layer, cut, baseline: null as unknown as Baseline, plan: null as unknown as HarmPlan, index, similarity, targets: probesTargets, unitMeans, key,
        setup: { ...setup, seed }, timing: { upstream: upstreamSeconds, baseline: 0 } },
      session, cache, batch, fixed, outputName,
    );
    const t1 = performance.now();
    const { data, width } = await ablator.forward([]);
    ablator.ctx.baseline = { probes: indices, outputs: data, width, targets: targetsForSample };
    ablator.ctx.plan = planHarm(ablator.ctx.baseline);
    ablator.ctx.timing.baseline = (performance.now() - t1) / 1000;
    return ablator;
  }

  /** Each ablated unit's slice of a probe's row of the layer, and the value it is replaced by (see surgery.ts). */
  private edits(units: number[]): { start: number; step: number; count: number; value: number }[] {
    const { layer, setup, unitMeans } = this.ctx;
    return units.map((u) => {
      if (!(Number.isInteger(u) && u >= 0 && u < layer.units)) {
        throw new SkeinError({ code: 'request', where: 'unit', message: `Layer "${layer.name}" has units 0 to ${layer.units - 1}; there is no unit ${u}.` });
      }
      const value = setup.mode === 'mean' ? unitMeans[u] : setup.mode === 'value' ? setup.value! : 0;
      return { ...unitSlice(layer.kind, layer.dims, u), value };
    });
  }

  private async forward(units: number[]): Promise<{ data: Float32Array; width: number }> {
    const layerCache = this.cache.get(this.ctx.layer.name)!;
    const per = layerCache.perProbe;
    const n = layerCache.data.length / per;
    const output = this.output;
    const edits = this.edits(units);
    const target = layerCache.data as Float32Array | Float64Array;
    const slots = edits.reduce((s, e) => s + e.count, 0);
    let result: Float32Array | null = null;
    let width = 0;
    for (let off = 0; off < n; off += this.batch) {
      const count = Math.min(this.batch, n - off);
      const rows = this.fixed ?? count;
      // Replace the units in the fed tensor itself (only their slices), run, then put the cached values back.
      // Contiguous slices (a conv map, a dense value) go through fill/set: a per-element loop cost more than the run.
      const saved = new (target.constructor as { new (k: number): Float32Array | Float64Array })(count * slots);
      let k = 0;
      for (let p = off; p < off + count; p++) {
        for (const e of edits) {
          const at = p * per + e.start;
          if (e.step === 1) {
            saved.set(target.subarray(at, at + e.count), k);
            target.fill(e.value, at, at + e.count);
            k += e.count;
          } else {
            for (let j = 0, q = at; j < e.count; j++, q += e.step) { saved[k++] = target[q]; target[q] = e.value; }
          }
        }
      }
      try {
        const feeds: Record<string, ort.Tensor> = {};
        for (const [name, c] of this.cache) {
          let slice = c.data.subarray(off * c.perProbe, (off + count) * c.perProbe) as Cached;
          if (rows > count) {
            const padded = new (c.data.constructor as { new (k: number): Cached })(rows * c.perProbe);
            (padded as Float32Array).set(slice as Float32Array);
            for (let r = count; r < rows; r++) (padded as Float32Array).copyWithin(r * c.perProbe, (count - 1) * c.perProbe, count * c.perProbe);
            slice = padded;
          }
          feeds[name] = new ort.Tensor(c.type, slice as Float32Array, [rows, ...c.dims]);
        }
        const out = (await this.session.run(feeds, [output]))[output];
        const outPer = out.size / out.dims[0];
        if (!result) { width = outPer; result = new Float32Array(n * outPer); }
        const src = out.data as Float32Array | Float64Array;
        for (let q = 0; q < count * outPer; q++) result[off * outPer + q] = src[q];
      } finally {
        k = 0;
        for (let p = off; p < off + count; p++) {
          for (const e of edits) {
            const at = p * per + e.start;
            if (e.step === 1) {
              target.set(saved.subarray(k, k + e.count), at);
              k += e.count;
            } else {
              for (let j = 0, q = at; j < e.count; j++, q += e.step) target[q] = saved[k++];
            }
          }
        }
      }
    }
    return { data: result ?? new Float32Array(0), width };
  }

  /** Model outputs with `units` of the layer replaced (probe-major, the baseline's probes). */
  async outputs(units: number[]): Promise<Float32Array> {
    return (await this.forward(units)).data;
  }

  /** What removing `units` costs per label. */
  async cost(units: number[], opts: CostOptions): Promise<UnitCost> {
    const ablated = await this.outputs(units);
    return labelCosts(probeHarm(this.ctx.baseline, this.ctx.plan, ablated), this.ctx.index, this.ctx.similarity, opts);
  }

  async release(): Promise<void> {
    await this.session.release();
  }
}

/** Mean of each unit over probes and positions (a conv channel's whole map, a sequence unit's every step). */
function meansPerUnit(data: Float32Array, n: number, layer: LayerRow): Float64Array {
  const means = new Float64Array(layer.units);
  const per = data.length / Math.max(1, n);
  if (n === 0) return means;
  if (layer.kind === 'conv') {
    const area = layer.dims[1] * layer.dims[2];
    for (let p = 0; p < n; p++) for (let c = 0; c < layer.units; c++) {
      let s = 0; const base = p * per + c * area;
      for (let k = 0; k < area; k++) s += data[base + k];
      means[c] += s / area;
    }
  } else if (layer.kind === 'sequence') {
    const steps = layer.dims[0];
    for (let p = 0; p < n; p++) for (let t = 0; t < steps; t++) for (let h = 0; h < layer.units; h++) means[h] += data[p * per + t * layer.units + h] / steps;
  } else {
    for (let p = 0; p < n; p++) for (let u = 0; u < layer.units; u++) means[u] += data[p * per + u];
  }
  for (let u = 0; u < layer.units; u++) means[u] /= n;
  return means;
}

function restrictTargets(t: Targets, indices: Int32Array): NonNullable<Baseline['targets']> {
  const offsets = new Int32Array(indices.length + 1);
  const values: number[] = [];
  indices.forEach((p, i) => {
    for (let k = t.offsets[p]; k < t.offsets[p + 1]; k++) values.push(t.values[k]);
    offsets[i + 1] = values.length;
  });
  return { kind: t.kind, offsets, values: Float64Array.from(values) };
}
