/**
 * Ablation on a study whose answers are known by construction: a linear read-out after the captured layer, where
 * unit "red" feeds only the red output, unit "blue+square" feeds the blue and square outputs, and unit "unread"
 * feeds nothing. Checks: the analytic logit change (Δlogits = −h_u · W_out[u, :], exact for a linear read-out,
 * tolerance 1e-5), which labels are hurt (precision and recall against the construction), the concept count of the
 * hurt set (Leinster & Cobbold 2012: k unrelated equally hurt labels → k), resume after cancel, and the CLI.
 * The statistics are checked against SciPy (Debian python3-scipy) and NumPy.
 */
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runScan, createApi } from '../../core/api/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { readBinding, findLayer } from '../../core/store/binding.ts';
import { readUnit } from '../../core/store/activations.ts';
import { Ablator } from '../../core/intervene/run.ts';
import { ablateUnit, ablateLayer } from '../../core/intervene/job.ts';
import { studentTUpperTail, quantileSorted, regularizedBeta, bootstrapMeanInterval } from '../../core/intervene/stats.ts';
import { compareDriversAndCost } from '../../core/intervene/compare.ts';
import { mulberry32 } from '../../core/random.ts';
import { buildModel } from '../../core/model/writer.ts';
import { main } from '../../core/cli/main.ts';
import { HUES, FORMS, PLACES, PLANTED_LABELS, plantedProbes, tempDir, writeProbeSet } from '../support/fixtures.ts';

/** Hidden units by construction: input weights (label → weight) and the output labels the unit feeds (weight 2). */
const UNITS = [
  { name: 'red', weights: { red: 1 }, feeds: ['red'] },
  { name: 'blue+square', weights: { blue: 1, square: 1 }, feeds: ['blue', 'square'] },
  { name: 'unread', weights: { circle: 1 }, feeds: [] as string[] },
  { name: 'star', weights: { star: 1 }, feeds: ['star'] },
];
const READ = 2;

function causalModel(width: number): { bytes: Uint8Array; wOut: Float32Array } {
  const H = UNITS.length, L = PLANTED_LABELS.length;
  const w = new Float32Array(width * H);
  const wOut = new Float32Array(H * L);
  UNITS.forEach((u, j) => {
    for (const [label, v] of Object.entries(u.weights)) w[PLANTED_LABELS.indexOf(label) * H + j] = v;
    for (const label of u.feeds) wOut[j * L + PLANTED_LABELS.indexOf(label)] = READ;
  });
  const bytes = buildModel({
    name: 'causal',
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', width] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', L] }],
    initializers: [
      { name: 'W', dims: [width, H], data: w }, { name: 'b', dims: [H], data: new Float32Array(H) },
      { name: 'Wout', dims: [H, L], data: wOut }, { name: 'bout', dims: [L], data: new Float32Array(L).fill(0.5) },
    ],
    nodes: [
      { op: 'Gemm', inputs: ['x', 'W', 'b'], outputs: ['pre'] },
      { op: 'Relu', inputs: ['pre'], outputs: ['hidden'] },
      { op: 'Gemm', inputs: ['hidden', 'Wout', 'bout'], outputs: ['logits'] },
    ],
  });
  return { bytes, wOut };
}

const unitOf = (name: string) => UNITS.findIndex((u) => u.name === name);

describe('ablation on a model with known answers', () => {
  let dir: string, study: string, model: string, probes: string, wOut: Float32Array;

  beforeAll(async () => {
    dir = tempDir();
    const p = plantedProbes(1500, 21);
    const m = causalModel(p.width);
    wOut = m.wOut;
    model = path.join(dir, 'causal.onnx');
    fs.writeFileSync(model, m.bytes);
    probes = writeProbeSet({
      dir: path.join(dir, 'probes'), inputName: 'x', rows: p.rows, rowShape: [p.width], labels: p.labels,
      concepts: [...HUES.map((l) => ({ label: l, group: 'hue' })), ...FORMS.map((l) => ({ label: l, group: 'form' })), ...PLACES.map((l) => ({ label: l, group: 'place' }))],
    });
    const rows = ['probe,output,value'];
    p.labels.forEach((ls, i) => ls.forEach((l) => rows.push(`${i},logits,${PLANTED_LABELS.indexOf(l)}`)));
    fs.writeFileSync(path.join(probes, 'targets.csv'), rows.join('\n') + '\n');
    study = path.join(dir, 'causal.study');
    await runScan({ model, probes, study, layers: ['hidden'] });
  });

  it('zero ablation changes the logits by exactly −activation × read-out weights (linear read-out, 1e-5)', async () => {
    const db = openStudyDb(study);
    const a = await Ablator.open(db, { model, layer: 'hidden', mode: 'zero' });
    try {
      const run = readBinding(db)!;
      const L = PLANTED_LABELS.length;
      for (const u of [0, 1, 3]) {
        const h = readUnit(db, run, findLayer(db, 'hidden').id, u);
        const out = await a.outputs([u]);
        let worst = 0;
        for (let p = 0; p < run.probeCount; p++) for (let k = 0; k < L; k++) {
          const analytic = -h[p] * wOut[u * L + k];
          worst = Math.max(worst, Math.abs(out[p * L + k] - a.ctx.baseline.outputs[p * L + k] - analytic));
        }
        expect(worst).toBeLessThan(1e-5);
      }
    } finally {
      await a.release();
      db.close();
    }
  });

  it('removing a unit hurts exactly the labels whose outputs read it, and nothing for a unit no output reads', async () => {
    const db = openStudyDb(study);
    try {
      let tp = 0, fp = 0, fn = 0;
      for (const u of UNITS) {
        const { cost } = await ablateUnit(db, { model, layer: 'hidden', mode: 'zero' }, unitOf(u.name));
        expect(cost.metric).toBe('target-drop');
        const hurt = new Set(cost.hurt);
        for (const l of PLANTED_LABELS) {
          if (hurt.has(l) && u.feeds.includes(l)) tp++;
          else if (hurt.has(l)) fp++;
          else if (u.feeds.includes(l)) fn++;
        }
        if (u.name === 'red') {
          // Each red probe has 3 targets; only red's logit drops, by READ × 1: mean drop READ / 3 exactly.
          const red = cost.labels.find((l) => l.label === 'red')!;
          expect(red.mean).toBeCloseTo(READ / 3, 5);
          expect(red.interval![0]).toBeCloseTo(READ / 3, 5); // every red probe loses the same: a point interval
          expect(cost.conceptsHurt).toBeCloseTo(1, 6);
        }
        if (u.name === 'blue+square') expect(cost.conceptsHurt).toBeCloseTo(2, 1); // two unrelated labels, near-equal cost
        if (u.name === 'unread') {
          expect(cost.hurt).toEqual([]);
          expect(cost.labels.every((l) => l.mean === 0)).toBe(true);
          expect(cost.conceptsHurt).toBe(0);
        }
      }
      expect({ precision: tp / (tp + fp), recall: tp / (tp + fn) }).toEqual({ precision: 1, recall: 1 });
    } finally {
      db.close();
    }
  });

  it('without targets.csv the output change is measured (L2): the unread unit still hurts nothing; mean ablation too', async () => {
    const copy = path.join(dir, 'no-targets');
    fs.cpSync(probes, copy, { recursive: true });
    fs.rmSync(path.join(copy, 'targets.csv'));
    const s2 = path.join(dir, 'no-targets.study');
    await runScan({ model, probes: copy, study: s2, layers: ['hidden'] });
    const db = openStudyDb(s2);
    try {
      const unread = await ablateUnit(db, { model, layer: 'hidden', mode: 'mean' }, unitOf('unread'));
      expect(unread.cost.metric).toBe('l2');
      expect(unread.cost.hurt).toEqual([]);
      const red = await ablateUnit(db, { model, layer: 'hidden', mode: 'zero' }, unitOf('red'));
      expect(red.cost.hurt).toEqual(['red']);
    } finally {
      db.close();
    }
  });

  it('bulk mode: cancel after two units, resume computes only the rest; the layer view ranks by unrelated concepts hurt', async () => {
    const db = openStudyDb(study);
    const abort = new AbortController();
    let seen = 0;
    try {
      await expect(ablateLayer(db, { model, layer: 'hidden', mode: 'mean' }, {
        signal: abort.signal, onUnit: () => { seen++; if (seen === 2) abort.abort(); },
      })).rejects.toMatchObject({ code: 'cancelled' });
      expect(seen).toBe(2);
      const resumed = await ablateLayer(db, { model, layer: 'hidden', mode: 'mean' });
      expect({ computed: resumed.computed, reused: resumed.reused }).toEqual({ computed: UNITS.length - 2, reused: 2 });
    } finally {
      db.close();
    }
    const view = await createApi()['ablate.layer']({ study, layer: 'hidden' });
    expect(view.run?.mode).toBe('mean');
    expect(view.rows[0].unit).toBe(unitOf('blue+square'));
    expect(view.rows.at(-1)!.unit).toBe(unitOf('unread'));
    const roster = await createApi()['ablate.roster']({ study });
    expect(roster[0].units).toEqual([0, 1, 2, 3]);
  });

  it('skein ablate prints the unit check and refuses bad arguments with exit 2', async () => {
    const out: string[] = [];
    const log = console.log;
    console.log = (s: string) => out.push(s);
    try {
      expect(await main(['ablate', study, model, '--layer', 'hidden', '--unit', String(unitOf('red')), '--json'])).toBe(0);
    } finally {
      console.log = log;
    }
    const v = JSON.parse(out.join('\n'));
    expect(v.cost.hurt).toEqual(['red']);
    expect(v.drivers).toContain('red');
    expect(v.comparison.agreement).toBe('agree');
    const err = process.stderr.write;
    process.stderr.write = () => true;
    try {
      expect(await main(['ablate', study, model, '--layer', 'hidden'])).toBe(2);
      expect(await main(['ablate', study, model, '--layer', 'hidden', '--unit', '0', '--mode', 'value'])).toBe(2);
      expect(await main(['ablate', study, model, '--layer', 'hidden', '--unit', '99'])).toBe(1);
    } finally {
      process.stderr.write = err;
    }
  });
});

describe('the statistics of an ablation cost', () => {
  it('Student-t upper tail and the incomplete beta match SciPy (scipy.stats.t.sf, scipy.special.betainc)', () => {
    const cases: [number, number][] = [[0, 5], [1.5, 3], [2.2, 29], [-1, 10], [4, 200], [0.3, 1], [8, 1000]];
    const want = JSON.parse(execFileSync('/usr/bin/python3', ['-c',
      `import json; from scipy import stats, special; print(json.dumps([[float(stats.t.sf(t, d)) for t, d in ${JSON.stringify(cases)}], [float(special.betainc(2.5, 0.5, 0.3)), float(special.betainc(10, 3, 0.9))]]))`]).toString());
    cases.forEach(([t, d], i) => expect(studentTUpperTail(t, d)).toBeCloseTo(want[0][i], 10));
    expect(regularizedBeta(0.3, 2.5, 0.5)).toBeCloseTo(want[1][0], 10);
    expect(regularizedBeta(0.9, 10, 3)).toBeCloseTo(want[1][1], 10);
  });

  it('quantiles match numpy.percentile (linear); the bootstrap interval of a mean approaches mean ± 1.96·s/√n (CLT limit)', () => {
    const xs = Float64Array.from([3, 1, 4, 1, 5, 9, 2, 6]).sort();
    const want = JSON.parse(execFileSync('/usr/bin/python3', ['-c', 'import json, numpy as np; print(json.dumps([float(np.percentile([3,1,4,1,5,9,2,6], q)) for q in (2.5, 50, 97.5)]))']).toString());
    [0.025, 0.5, 0.975].forEach((q, i) => expect(quantileSorted(xs, q)).toBeCloseTo(want[i], 12));
    const r = mulberry32(3);
    const n = 2000;
    const v = Float64Array.from({ length: n }, () => r());
    const idx = Int32Array.from({ length: n }, (_, i) => i);
    const [lo, hi] = bootstrapMeanInterval(v, idx, n, 4000, mulberry32(4), 0.05, new Float64Array(4000));
    const mean = v.reduce((a, b) => a + b, 0) / n;
    const sd = Math.sqrt(v.reduce((a, b) => a + (b - mean) ** 2, 0) / (n - 1));
    const half = (1.96 * sd) / Math.sqrt(n);
    expect(Math.abs(hi - lo - 2 * half) / (2 * half)).toBeLessThan(0.1);
    expect(bootstrapMeanInterval(Float64Array.from([2, 2, 2]), Int32Array.from([0, 1, 2]), 3, 100, r, 0.05, new Float64Array(100))).toEqual([2, 2]);
  });

  it('says in words whether the two sides agree', () => {
    expect(compareDriversAndCost(['A', 'B'], ['B', 'A']).agreement).toBe('agree');
    expect(compareDriversAndCost(['A'], []).sentence).toMatch(/disagree.*hurts nothing/);
    expect(compareDriversAndCost([], ['C']).agreement).toBe('disagree-hurt-only');
    expect(compareDriversAndCost(['A', 'B'], ['A', 'C']).sentence).toMatch(/partly agree.*hurts A.*also C.*B drives it but is not hurt/);
  });
});
