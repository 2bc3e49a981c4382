/**
 * Recovery on known ground truth (Sharkey et al. 2022, "Taking features out of superposition with sparse
 * autoencoders"): 192 unit directions in 64 dimensions, each on for 3 % of probes with a uniform [0, 1] weight. The
 * learned decoder must find them again: mean max cosine similarity (their metric) ≥ 0.9, the bar issue 14 sets.
 * Then the same run through a study: out of core, cancelled after an epoch, resumed, and identical to an
 * uninterrupted run; and `skein dictionary show --json`.
 */
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { sparseMixture, arraySource, meanMaxCosine } from './synthetic.ts';
import { measureDictionary, toStoredSae, trainDictionary } from '../../core/dictionary/train.ts';
import { createOrtEncoder } from '../../core/dictionary/encoder.ts';
import { layerDictionary } from '../../core/dictionary/job.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { bindStudy, insertLayer } from '../../core/store/binding.ts';
import { markChunksDone, writeUnitChunks } from '../../core/store/activations.ts';
import { readDictionary } from '../../core/store/dictionary.ts';
import { tempDir } from '../support/fixtures.ts';

const truth = { features: 192, units: 64, probes: 12_000, p: 0.03, seed: 7 };
const training = { k: 12, epochs: 8, lr: 5e-3, batch: 128, seed: 1 };

describe('dictionary recovery on planted features', () => {
  it('finds the true directions (mean max cosine ≥ 0.9, Sharkey et al. 2022)', async () => {
    const s = sparseMixture(truth);
    const src = arraySource(s.data, s.units, 1024);
    const encoder = await createOrtEncoder(1);
    try {
      const state = await trainDictionary(src, training, encoder);
      const sae = toStoredSae(state);
      expect(sae.features).toBe(256); // 4× expansion by default
      const mmcs = meanMaxCosine(s.truth, s.features, sae.wDec, sae.features, s.units);
      const metrics = await measureDictionary(src, sae, encoder);
      console.log(`recovery: MMCS ${mmcs.toFixed(3)}, variance explained ${metrics.varianceExplained.toFixed(3)}, L0 ${metrics.meanL0.toFixed(2)}, dead ${metrics.deadFraction}`);
      expect(mmcs).toBeGreaterThanOrEqual(0.9);
      // A random dictionary of 256 directions in 64 dimensions scores far lower: the bar is not met by chance.
      const random = toStoredSae({ ...state, sae: (await import('../../core/dictionary/sae.ts')).initSae(64, 256, 12, (await import('../../core/random.ts')).mulberry32(99)), scale: 1 });
      expect(meanMaxCosine(s.truth, s.features, random.wDec, 256, 64)).toBeLessThan(0.6);
      expect(metrics.meanL0).toBeLessThanOrEqual(12);
      // Each loss is below the one before it, over the first epochs (training makes progress).
      expect(state.losses[3]).toBeLessThan(state.losses[0]);
    } finally {
      await encoder.release();
    }
  }, 300_000);

  it('trains out of core in a study, resumes a cancelled run to the same result, and shows it on the command line', async () => {
    const s = sparseMixture({ ...truth, probes: 3000 });
    const dir = tempDir('skein-dict-');
    const makeStudy = (name: string) => {
      const file = path.join(dir, name);
      const db = openStudyDb(file, { create: true });
      bindStudy(db, { path: 'planted.onnx', fingerprint: 'm', json: '{}' }, {
        dir: 'planted', fingerprint: 'p', name: 'planted', count: s.probes, labels: [], labelOffsets: new Int32Array(s.probes + 1), labelIds: new Int32Array(0),
        concepts: null, examples: null, relatedness: null,
      }, 1024);
      const id = insertLayer(db, { name: 'mix', op: 'Relu', node: 'mix', position: 0, dims: [s.units], kind: 'dense', units: s.units, pool: 'none' });
      for (let u = 0; u < s.units; u++) writeUnitChunks(db, id, u, 1024, Float32Array.from({ length: s.probes }, (_, n) => s.data[n * s.units + u]));
      markChunksDone(db, id, [0, 1, 2]);
      return { file, db, id };
    };
    const opts = { ...training, epochs: 3 };
    const a = makeStudy('a.study');
    const whole = await layerDictionary(a.db, 'mix', opts, { threads: 1 });
    expect(whole.resumedFromEpoch).toBe(0);
    expect((await layerDictionary(a.db, 'mix', opts, { threads: 1 })).reused).toBe(true);
    a.db.close();

    const b = makeStudy('b.study');
    const controller = new AbortController();
    const cut = layerDictionary(b.db, 'mix', opts, { threads: 1, signal: controller.signal, onProgress: (p) => { if (p.done > s.probes) controller.abort(); } });
    await expect(cut).rejects.toMatchObject({ code: 'cancelled' });
    const checkpoint = readDictionary(b.db, b.id)!;
    expect(checkpoint.state).toBe('training');
    expect([1, 2]).toContain(checkpoint.epoch); // the cancel lands in the second epoch or, on a slow report, the third
    const resumed = await layerDictionary(b.db, 'mix', opts, { threads: 1 });
    expect(resumed.resumedFromEpoch).toBe(checkpoint.epoch);
    expect(resumed.losses).toEqual(whole.losses);
    expect(Array.from(resumed.sae.wDec)).toEqual(Array.from(whole.sae.wDec));
    b.db.close();

    const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');
    const r = spawnSync(process.execPath, [bin, 'dictionary', 'show', b.file, '--layer', 'mix', '--json'], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const shown = JSON.parse(r.stdout);
    expect(shown.features).toBe(256);
    expect(shown.varianceExplained).toBeCloseTo(whole.metrics.varianceExplained, 6);
    expect(shown.caution).toMatch(/not proof/);
  }, 300_000);
});
