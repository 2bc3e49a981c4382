/**
 * A toy model of superposition in a privileged basis, after Elhage et al. 2022, "Toy Models of Superposition"
 * (section "Superposition in a privileged basis"): n sparse features x_i (active with probability p, value uniform
 * in [0, 1]) pass through m < n ReLU neurons h = ReLU(W x + c) and are read back as x' = ReLU(Wᵀ h + b); the loss is
 * Σ_i I_i (x_i − x'_i)² with importance I_i = 0.9^i. We add the hidden bias c (our choice) so a neuron's firing
 * threshold is explicit. Trained here with Adam (Kingma & Ba 2015) from a seeded start: deterministic.
 *
 * Ground truth (our definition, in core/score/NOTES.md): feature i drives neuron j when, alone at its typical value
 * (the median 0.5 of its active values), it makes the neuron fire: W_ji · 0.5 + c_j > 0 — the neuron is on for more
 * than half of the probes where feature i is the only active feature among those that drive j.
 */
import { mulberry32 } from '../../sample-data/lib/prng.ts';

export interface ToyModel { n: number; m: number; p: number; W: Float64Array; c: Float64Array; b: Float64Array }

export function trainToy(opts: { n: number; m: number; p: number; seed: number; steps?: number; batch?: number; lr?: number; hiddenBias?: boolean }): ToyModel {
  const { n, m, p } = opts;
  const steps = opts.steps ?? 3000;
  const batch = opts.batch ?? 128;
  const lr = opts.lr ?? 0.01;
  const r = mulberry32(opts.seed);
  const W = Float64Array.from({ length: m * n }, () => (2 * r() - 1) * Math.sqrt(6 / (n + m))); // W[j*n+i]
  const c = new Float64Array(m);
  const b = new Float64Array(n);
  const importance = Float64Array.from({ length: n }, (_, i) => 0.9 ** i);
  const params = [W, c, b];
  const mom = params.map((q) => new Float64Array(q.length));
  const vel = params.map((q) => new Float64Array(q.length));
  const grads = params.map((q) => new Float64Array(q.length));
  const x = new Float64Array(n);
  const h = new Float64Array(m);
  const dh = new Float64Array(m);
  const out = new Float64Array(n);
  for (let step = 1; step <= steps; step++) {
    for (const g of grads) g.fill(0);
    for (let s = 0; s < batch; s++) {
      for (let i = 0; i < n; i++) x[i] = r() < p ? r() : 0;
      for (let j = 0; j < m; j++) {
        let v = c[j];
        for (let i = 0; i < n; i++) v += W[j * n + i] * x[i];
        h[j] = v > 0 ? v : 0;
      }
      dh.fill(0);
      for (let i = 0; i < n; i++) {
        let v = b[i];
        for (let j = 0; j < m; j++) v += W[j * n + i] * h[j];
        out[i] = v > 0 ? v : 0;
        const dOut = v > 0 ? (2 * importance[i] * (out[i] - x[i])) / batch : 0;
        if (dOut === 0) continue;
        grads[2][i] += dOut;
        for (let j = 0; j < m; j++) {
          grads[0][j * n + i] += dOut * h[j]; // decoder use of W
          dh[j] += dOut * W[j * n + i];
        }
      }
      for (let j = 0; j < m; j++) {
        if (h[j] <= 0) continue;
        if (opts.hiddenBias) grads[1][j] += dh[j];
        for (let i = 0; i < n; i++) grads[0][j * n + i] += dh[j] * x[i]; // encoder use of W
      }
    }
    params.forEach((q, k) => {
      for (let t = 0; t < q.length; t++) {
        const g = grads[k][t];
        mom[k][t] = 0.9 * mom[k][t] + 0.1 * g;
        vel[k][t] = 0.999 * vel[k][t] + 0.001 * g * g;
        const mh = mom[k][t] / (1 - 0.9 ** step);
        const vh = vel[k][t] / (1 - 0.999 ** step);
        q[t] -= (lr * mh) / (Math.sqrt(vh) + 1e-8);
      }
    });
  }
  return { n, m, p, W, c, b };
}

/** Probes from the training distribution: labels are the active features ("f0" ...), activations the neurons. */
export function toyProbes(model: ToyModel, count: number, seed: number): { labels: string[][]; activations: Float32Array[] } {
  const { n, m, p, W, c } = model;
  const r = mulberry32(seed);
  const activations = Array.from({ length: m }, () => new Float32Array(count));
  const labels: string[][] = [];
  const x = new Float64Array(n);
  for (let s = 0; s < count; s++) {
    const ls: string[] = [];
    for (let i = 0; i < n; i++) {
      x[i] = r() < p ? r() : 0;
      if (x[i] > 0) ls.push(`f${i}`);
    }
    labels.push(ls);
    for (let j = 0; j < m; j++) {
      let v = c[j];
      for (let i = 0; i < n; i++) v += W[j * n + i] * x[i];
      activations[j][s] = v > 0 ? v : 0;
    }
  }
  return { labels, activations };
}

/** True drivers of neuron j: W_ji · 0.5 + c_j > 0 (fires alone at the feature's median active value). */
export function trueDrivers(model: ToyModel, j: number): number[] {
  const out: number[] = [];
  for (let i = 0; i < model.n; i++) if (model.W[j * model.n + i] * 0.5 + model.c[j] > 0) out.push(i);
  return out;
}

/** The stricter reading: fires alone at the median with at least `fraction` of the neuron's strongest such response. */
export function strongDrivers(model: ToyModel, j: number, fraction: number): number[] {
  const response = (i: number) => model.W[j * model.n + i] * 0.5 + model.c[j];
  const all = trueDrivers(model, j);
  const best = Math.max(0, ...all.map(response));
  return all.filter((i) => response(i) >= fraction * best);
}
