/**
 * Drivers on toy models of superposition in a privileged basis (Elhage et al. 2022, "Toy Models of Superposition",
 * the ReLU-hidden-layer model), trained by test/support/toy-superposition.ts: each neuron's true features are read
 * from its weights (definition in core/score/NOTES.md). Bars from the issue: driver precision and recall ≥ 0.9 and
 * Spearman rank correlation (Spearman 1904) between concept count and true feature count ≥ 0.8, in the sparse regime.
 * The denser regime (each feature on 20 % of inputs) is measured and logged; see NOTES.md for why it falls short.
 */
import { describe, expect, it } from 'vitest';
import { buildRelatedness, createScratch, defaultScoreOptions, finishLayer, scoreUnitPartial } from '../../core/score/index.ts';
import { strongDrivers, toyProbes, trainToy, trueDrivers } from '../support/toy-superposition.ts';
import { labelMatrixOf } from './helpers.ts';

/** Spearman's rho = Pearson correlation of mid-ranks. */
function spearman(x: number[], y: number[]): number {
  const ranks = (v: number[]) => {
    const order = v.map((value, i) => ({ value, i })).sort((a, b) => a.value - b.value);
    const r = new Array<number>(v.length);
    for (let i = 0; i < order.length; ) {
      let j = i;
      while (j + 1 < order.length && order[j + 1].value === order[i].value) j++;
      for (let k = i; k <= j; k++) r[order[k].i] = (i + j) / 2 + 1;
      i = j + 1;
    }
    return r;
  };
  const a = ranks(x);
  const b = ranks(y);
  const mean = (v: number[]) => v.reduce((s, t) => s + t, 0) / v.length;
  const ma = mean(a);
  const mb = mean(b);
  let num = 0;
  let da = 0;
  let db = 0;
  for (let i = 0; i < a.length; i++) {
    num += (a[i] - ma) * (b[i] - mb);
    da += (a[i] - ma) ** 2;
    db += (b[i] - mb) ** 2;
  }
  return num / Math.sqrt(da * db);
}

function measure(models: { m: number; p: number; seed: number }[]) {
  let tp = 0;
  let fp = 0;
  let fn = 0;
  let looseTp = 0;
  let looseFn = 0;
  const counts: number[] = [];
  const truths: number[] = [];
  for (const spec of models) {
    const model = trainToy({ n: 20, ...spec });
    const names = Array.from({ length: 20 }, (_, i) => `f${i}`);
    const { labels, activations } = toyProbes(model, 8000, spec.seed + 100);
    const matrix = labelMatrixOf(names, labels);
    const scratch = createScratch(matrix);
    const partials = activations.map((v, u) => scoreUnitPartial(u, v, matrix, defaultScoreOptions, scratch));
    const scores = finishLayer(partials, buildRelatedness(names, matrix, null, null, { wordnet: false }), defaultScoreOptions);
    scores.forEach((s, j) => {
      if (s.flags.includes('dead')) return;
      const truth = new Set(strongDrivers(model, j, 0.2));
      const loose = new Set(trueDrivers(model, j));
      const found = new Set(s.drivers.flatMap((d) => d.labels));
      for (const f of found) (truth.has(f) ? tp++ : fp++);
      for (const f of truth) if (!found.has(f)) fn++;
      for (const f of loose) (found.has(f) ? looseTp++ : looseFn++);
      counts.push(s.conceptCount);
      truths.push(truth.size);
    });
  }
  return { precision: tp / (tp + fp), recall: tp / (tp + fn), looseRecall: looseTp / (looseTp + looseFn), rho: spearman(counts, truths), neurons: counts.length };
}

describe('drivers on toy models of superposition (Elhage et al. 2022)', () => {
  it('sparse regime (features on 5 % of inputs): precision ≥ 0.9, recall ≥ 0.9, Spearman(count, true count) ≥ 0.8', () => {
    const r = measure([{ m: 5, p: 0.05, seed: 1 }, { m: 8, p: 0.05, seed: 2 }, { m: 12, p: 0.05, seed: 3 }]);
    console.log(`toy sparse: ${r.neurons} neurons, precision ${r.precision.toFixed(3)}, recall ${r.recall.toFixed(3)} (any positive weight: ${r.looseRecall.toFixed(3)}), Spearman ${r.rho.toFixed(3)}`);
    expect(r.precision).toBeGreaterThanOrEqual(0.9);
    expect(r.recall).toBeGreaterThanOrEqual(0.9);
    expect(r.rho).toBeGreaterThanOrEqual(0.8);
  }, 120_000);

  it('denser regime (features on 20 % of inputs): precision stays ≥ 0.9; recall and Spearman are logged', () => {
    const r = measure([{ m: 8, p: 0.2, seed: 1 }, { m: 8, p: 0.2, seed: 2 }]);
    console.log(`toy dense: ${r.neurons} neurons, precision ${r.precision.toFixed(3)}, recall ${r.recall.toFixed(3)} (any positive weight: ${r.looseRecall.toFixed(3)}), Spearman ${r.rho.toFixed(3)}`);
    expect(r.precision).toBeGreaterThanOrEqual(0.9);
  }, 120_000);
});
