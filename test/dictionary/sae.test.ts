/**
 * The TopK dictionary's arithmetic against things outside it: gradients against central finite differences
 * (the definition of the derivative), the encoder's onnxruntime Gemm against the plain loop, and the forward pass
 * against an independent numpy forward pass of the same weights (Debian's python3-numpy).
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { mulberry32, gaussian } from '../../core/random.ts';
import { batchGradients, centre, codesFromPreacts, decode, initSae, topK, zeroGrads, type Sae } from '../../core/dictionary/sae.ts';
import { createOrtEncoder, loopEncoder } from '../../core/dictionary/encoder.ts';
import { writeNpyFloat32 } from '../../core/probes/npy.ts';
import { tempDir } from '../support/fixtures.ts';

const PYTHON = '/usr/bin/python3';
const hasNumpy = fs.existsSync(PYTHON) && spawnSync(PYTHON, ['-c', 'import numpy']).status === 0;

function randomSae(d: number, m: number, k: number, seed: number): Sae {
  const rng = mulberry32(seed);
  const sae = initSae(d, m, k, rng);
  for (let i = 0; i < sae.wEnc.length; i++) sae.wEnc[i] += 0.3 * gaussian(rng);
  for (let i = 0; i < m; i++) sae.bEnc[i] = 0.1 * gaussian(rng);
  for (let i = 0; i < d; i++) sae.bDec[i] = 0.2 * gaussian(rng);
  return sae;
}

function randomBatch(n: number, d: number, seed: number): Float32Array {
  const rng = mulberry32(seed);
  return Float32Array.from({ length: n * d }, () => gaussian(rng));
}

describe('TopK selection', () => {
  it('keeps the k largest positive entries (checked against a full sort)', () => {
    const rng = mulberry32(3);
    for (let trial = 0; trial < 50; trial++) {
      const z = Float32Array.from({ length: 40 }, () => gaussian(rng));
      const idx = new Int32Array(7), val = new Float32Array(7);
      const n = topK(z, 0, 40, 7, idx, val);
      const want = [...z].map((v, j) => [v, j]).filter(([v]) => v > 0).sort((a, b) => b[0] - a[0]).slice(0, 7).map(([, j]) => j).sort((a, b) => a - b);
      expect([...idx.subarray(0, n)].sort((a, b) => a - b)).toEqual(want);
    }
  });
});

describe('gradients', () => {
  // Central differences: (L(θ+ε) − L(θ−ε)) / 2ε → ∂L/∂θ as ε → 0 (the definition; error O(ε²)). The auxiliary loss
  // holds its residual fixed, as the paper's detached residual does.
  it.each([false, true])('match finite differences (auxiliary loss: %s)', async (withAux) => {
    const d = 6, m = 14, k = 3, n = 5;
    const sae = randomSae(d, m, k, 11);
    const x = randomBatch(n, d, 12);
    const dead = withAux ? Uint8Array.from({ length: m }, (_, j) => (j % 2 === 0 ? 1 : 0)) : null;
    const loss = async (s: Sae, grads = zeroGrads(s)) => {
      const xc = centre(s, x, n);
      const z = await loopEncoder.preacts(xc, n, d, s.wEnc, s.bEnc, m);
      const residual = withAux ? Float32Array.from({ length: n * d }, (_, i) => 0.5 * Math.sin(i)) : undefined;
      const r = batchGradients(s, x, xc, z, n, grads, { dead, kAux: 4, alpha: 0.5, residual });
      return r.loss + r.auxLoss;
    };
    const grads = zeroGrads(sae);
    await loss(sae, grads);
    const eps = 1e-3;
    let checked = 0;
    for (const name of ['wEnc', 'bEnc', 'wDec', 'bDec'] as const) {
      for (let i = 0; i < sae[name].length; i += name.startsWith('w') ? 5 : 1) {
        const keep = sae[name][i];
        sae[name][i] = keep + eps; const up = await loss(sae);
        sae[name][i] = keep - eps; const down = await loss(sae);
        sae[name][i] = keep;
        const numeric = (up - down) / (2 * eps);
        expect(Math.abs(grads[name][i] - numeric), `${name}[${i}]`).toBeLessThan(2e-3 + 1e-2 * Math.abs(numeric));
        checked++;
      }
    }
    expect(checked).toBeGreaterThan(40);
    expect(Math.max(...grads.wEnc.map(Math.abs))).toBeGreaterThan(1e-2); // the check is not vacuous
  });
});

describe('encoder', () => {
  it('onnxruntime Gemm and the plain loop give the same pre-activations', async () => {
    const d = 33, m = 70, n = 19;
    const sae = randomSae(d, m, 5, 5);
    const xc = centre(sae, randomBatch(n, d, 6), n);
    const ort = await createOrtEncoder(1);
    try {
      const a = await ort.preacts(xc, n, d, sae.wEnc, sae.bEnc, m);
      const b = await loopEncoder.preacts(xc, n, d, sae.wEnc, sae.bEnc, m);
      for (let i = 0; i < a.length; i++) expect(a[i]).toBeCloseTo(b[i], 4);
    } finally {
      await ort.release();
    }
  });
});

describe('forward pass', () => {
  it.skipIf(!hasNumpy)('matches an independent numpy forward pass of the same weights', async () => {
    const d = 16, m = 64, k = 5, n = 40;
    const sae = randomSae(d, m, k, 21);
    const x = randomBatch(n, d, 22);
    const z = await loopEncoder.preacts(centre(sae, x, n), n, d, sae.wEnc, sae.bEnc, m);
    const xhat = decode(sae, codesFromPreacts(z, n, m, k), n, true);
    const dir = tempDir('skein-sae-np-');
    const put = (name: string, shape: number[], a: Float32Array) => writeNpyFloat32(path.join(dir, name), shape, a);
    put('x.npy', [n, d], x); put('wenc.npy', [m, d], sae.wEnc); put('benc.npy', [m], sae.bEnc);
    put('wdec.npy', [m, d], sae.wDec); put('bdec.npy', [d], sae.bDec);
    const script = `
import numpy as np, sys, os
L = lambda f: np.load(os.path.join(sys.argv[1], f)).astype(np.float64)
x, we, be, wd, bd = L('x.npy'), L('wenc.npy'), L('benc.npy'), L('wdec.npy'), L('bdec.npy')
z = (x - bd) @ we.T + be
a = np.zeros_like(z)
top = np.argsort(-z, axis=1)[:, :${k}]
rows = np.arange(z.shape[0])[:, None]
a[rows, top] = np.maximum(z[rows, top], 0)
np.save(os.path.join(sys.argv[1], 'xhat.npy'), (a @ wd + bd).astype(np.float32))
`;
    const r = spawnSync(PYTHON, ['-c', script, dir], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const buf = fs.readFileSync(path.join(dir, 'xhat.npy'));
    const headerLen = buf.readUInt16LE(8);
    const ref = new Float32Array(buf.buffer.slice(buf.byteOffset + 10 + headerLen, buf.byteOffset + buf.byteLength));
    expect(ref.length).toBe(n * d);
    for (let i = 0; i < ref.length; i++) expect(xhat[i]).toBeCloseTo(ref[i], 4);
  });
});
