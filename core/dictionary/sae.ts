/**
 * A TopK sparse autoencoder (Gao et al. 2024, "Scaling and evaluating sparse autoencoders"), in typed arrays.
 *
 *   z = W_enc (x − b_dec) + b_enc          pre-activations, one per feature (m features, d units)
 *   a = ReLU(TopK_k(z))                    the k largest pre-activations kept, the rest zero
 *   x̂ = Σ_j a_j d_j + b_dec                d_j = row j of W_dec, kept at unit norm
 *
 * Weights are row-major [m × d] for both encoder and decoder (row j is feature j), so every sparse step reads one
 * contiguous row. Only the encoder product is dense (B × d × m); it is done by an `Encoder` (encoder.ts). Loss:
 * L = Σ_b ‖x̂_b − x_b‖² / B plus the auxiliary loss α · Σ_b ‖ê_b − r_b‖² / Σ_b ‖r_b‖² of the paper (§A.2), where
 * ê reconstructs the detached residual r = x − x̂ from the top k_aux pre-activations of the dead features.
 */
import { gaussian, type Rng } from '../random.ts';

export interface Sae {
  units: number;
  features: number;
  k: number;
  wEnc: Float32Array;
  bEnc: Float32Array;
  wDec: Float32Array;
  bDec: Float32Array;
}

/**
 * Seeded initialisation as in Gao et al. 2024 §2.3–2.4: decoder rows random unit directions, encoder the decoder's
 * transpose (rows equal here, since both are feature-major), b_enc = 0, b_dec = the data mean (they use the geometric
 * median; the mean is the cheaper stand-in).
 */
export function initSae(units: number, features: number, k: number, rng: Rng, mean?: Float32Array): Sae {
  const wDec = new Float32Array(features * units);
  for (let i = 0; i < wDec.length; i++) wDec[i] = gaussian(rng);
  normaliseRows(wDec, features, units);
  return { units, features, k, wEnc: wDec.slice(), bEnc: new Float32Array(features), wDec, bDec: mean ? mean.slice() : new Float32Array(units) };
}

export function normaliseRows(w: Float32Array, rows: number, cols: number): void {
  for (let j = 0; j < rows; j++) {
    let s = 0;
    for (let i = j * cols; i < (j + 1) * cols; i++) s += w[i] * w[i];
    const inv = s > 0 ? 1 / Math.sqrt(s) : 0;
    for (let i = j * cols; i < (j + 1) * cols; i++) w[i] *= inv;
  }
}

/** x − b_dec for every row of a probe-major batch. */
export function centre(sae: Sae, x: Float32Array, batch: number, out = new Float32Array(batch * sae.units)): Float32Array {
  const d = sae.units;
  for (let b = 0; b < batch; b++) for (let i = 0; i < d; i++) out[b * d + i] = x[b * d + i] - sae.bDec[i];
  return out;
}

/**
 * The k largest entries of z[offset .. offset+m) (restricted to `allowed` when given) with positive value, by a
 * size-k min-heap; writes their indices and values into idx/val and returns how many there are (≤ k).
 */
export function topK(z: Float32Array, offset: number, m: number, k: number, idx: Int32Array, val: Float32Array, allowed?: Uint8Array): number {
  let n = 0;
  for (let j = 0; j < m; j++) {
    const v = z[offset + j];
    if (!(v > 0) || (allowed && !allowed[j])) continue;
    if (n < k) {
      // sift up
      let c = n++;
      while (c > 0) {
        const p = (c - 1) >> 1;
        if (val[p] <= v) break;
        val[c] = val[p]; idx[c] = idx[p]; c = p;
      }
      val[c] = v; idx[c] = j;
    } else if (v > val[0]) {
      // replace the minimum, sift down
      let c = 0;
      for (;;) {
        const l = 2 * c + 1;
        if (l >= k) break;
        const r = l + 1;
        const s = r < k && val[r] < val[l] ? r : l;
        if (val[s] >= v) break;
        val[c] = val[s]; idx[c] = idx[s]; c = s;
      }
      val[c] = v; idx[c] = j;
    }
  }
  return n;
}

/** A batch's sparse codes: row b's active features are idx[b*k .. b*k+count[b]), values in val. */
export interface Codes { k: number; count: Int32Array; idx: Int32Array; val: Float32Array }

export function codesFromPreacts(z: Float32Array, batch: number, m: number, k: number, allowed?: Uint8Array): Codes {
  const count = new Int32Array(batch);
  const idx = new Int32Array(batch * k);
  const val = new Float32Array(batch * k);
  for (let b = 0; b < batch; b++) count[b] = topK(z, b * m, m, k, idx.subarray(b * k), val.subarray(b * k), allowed);
  return { k, count, idx, val };
}

/** x̂ = Σ a_j d_j (+ b_dec when `withBias`) for every row of the batch. */
export function decode(sae: Sae, codes: Codes, batch: number, withBias: boolean, out = new Float32Array(batch * sae.units)): Float32Array {
  const d = sae.units;
  const { wDec, bDec } = sae;
  for (let b = 0; b < batch; b++) {
    const o = b * d;
    if (withBias) for (let i = 0; i < d; i++) out[o + i] = bDec[i];
    else out.fill(0, o, o + d);
    for (let t = 0; t < codes.count[b]; t++) {
      const j = codes.idx[b * codes.k + t];
      const a = codes.val[b * codes.k + t];
      const r = j * d;
      for (let i = 0; i < d; i++) out[o + i] += a * wDec[r + i];
    }
  }
  return out;
}

export interface Grads { wEnc: Float32Array; bEnc: Float32Array; wDec: Float32Array; bDec: Float32Array }

export function zeroGrads(sae: Sae): Grads {
  return { wEnc: new Float32Array(sae.wEnc.length), bEnc: new Float32Array(sae.features), wDec: new Float32Array(sae.wDec.length), bDec: new Float32Array(sae.units) };
}

/**
 * Back-propagates an upstream gradient g_b = ∂L/∂(Σ_j a_bj d_j) through the active features of `codes`:
 * ∂d_j += a_bj g_b; ∂z_bj = g_b·d_j (a_bj > 0, so ReLU and TopK pass it); ∂W_enc[j] += ∂z_bj xc_b; ∂b_enc[j] += ∂z_bj;
 * ∂b_dec −= ∂z_bj W_enc[j] (b_dec also centres the input).
 */
function backThroughCodes(sae: Sae, codes: Codes, batch: number, xc: Float32Array, g: Float32Array, grads: Grads): void {
  const d = sae.units;
  for (let b = 0; b < batch; b++) {
    const o = b * d;
    for (let t = 0; t < codes.count[b]; t++) {
      const j = codes.idx[b * codes.k + t];
      const a = codes.val[b * codes.k + t];
      const r = j * d;
      let dz = 0;
      for (let i = 0; i < d; i++) {
        dz += g[o + i] * sae.wDec[r + i];
        grads.wDec[r + i] += a * g[o + i];
      }
      grads.bEnc[j] += dz;
      for (let i = 0; i < d; i++) {
        grads.wEnc[r + i] += dz * xc[o + i];
        grads.bDec[i] -= dz * sae.wEnc[r + i];
      }
    }
  }
}

export interface BatchResult { loss: number; auxLoss: number; codes: Codes; sumSquaredError: number }

/**
 * Loss and gradients of one batch, given its centred inputs xc and pre-activations z (from an Encoder).
 * `dead` marks features eligible for the auxiliary loss (none: no auxiliary term). `residual`, when given, replaces
 * the detached residual x − x̂ (finite-difference tests hold it fixed, as the detached gradient assumes).
 */
export function batchGradients(
  sae: Sae, x: Float32Array, xc: Float32Array, z: Float32Array, batch: number, grads: Grads,
  aux: { dead: Uint8Array | null; kAux: number; alpha: number; residual?: Float32Array },
): BatchResult {
  const d = sae.units;
  const m = sae.features;
  const codes = codesFromPreacts(z, batch, m, sae.k);
  const xhat = decode(sae, codes, batch, true);
  const g = new Float32Array(batch * d);
  let sse = 0;
  for (let i = 0; i < batch * d; i++) {
    const e = xhat[i] - x[i];
    sse += e * e;
    g[i] = (2 * e) / batch;
  }
  for (let i = 0; i < d; i++) for (let b = 0; b < batch; b++) grads.bDec[i] += g[b * d + i];
  backThroughCodes(sae, codes, batch, xc, g, grads);
  let auxLoss = 0;
  if (aux.dead && aux.kAux > 0) {
    const auxCodes = codesFromPreacts(z, batch, m, aux.kAux, aux.dead);
    const ehat = decode(sae, auxCodes, batch, false);
    const r = aux.residual ?? Float32Array.from(xhat, (v, i) => x[i] - v);
    let rr = 0;
    for (let i = 0; i < batch * d; i++) rr += r[i] * r[i];
    if (rr > 0) {
      let num = 0;
      for (let i = 0; i < batch * d; i++) {
        const e = ehat[i] - r[i];
        num += e * e;
        g[i] = (2 * aux.alpha * e) / rr;
      }
      auxLoss = (aux.alpha * num) / rr;
      backThroughCodes(sae, auxCodes, batch, xc, g, grads);
    }
  }
  return { loss: sse / batch, auxLoss, codes, sumSquaredError: sse };
}

/** Removes from each decoder row's gradient its component along the row (the row's norm is fixed; Gao et al. 2024 §2.4; Bricken et al. 2023). */
export function projectDecoderGrad(sae: Sae, grads: Grads): void {
  const d = sae.units;
  for (let j = 0; j < sae.features; j++) {
    const r = j * d;
    let dot = 0;
    for (let i = 0; i < d; i++) dot += grads.wDec[r + i] * sae.wDec[r + i];
    if (dot !== 0) for (let i = 0; i < d; i++) grads.wDec[r + i] -= dot * sae.wDec[r + i];
  }
}

/** Adam (Kingma & Ba 2015) moments for every parameter, in the order wEnc, bEnc, wDec, bDec. */
export interface AdamState { step: number; m: Float32Array[]; v: Float32Array[] }

export function newAdam(sae: Sae): AdamState {
  const shapes = [sae.wEnc.length, sae.features, sae.wDec.length, sae.units];
  return { step: 0, m: shapes.map((n) => new Float32Array(n)), v: shapes.map((n) => new Float32Array(n)) };
}

/** One Adam step (β1 0.9, β2 0.999, ε 1e-8: Kingma & Ba 2015's defaults), then the decoder rows back to unit norm. */
export function adamStep(sae: Sae, grads: Grads, adam: AdamState, lr: number): void {
  const b1 = 0.9, b2 = 0.999, eps = 1e-8;
  adam.step++;
  const c1 = 1 - Math.pow(b1, adam.step), c2 = 1 - Math.pow(b2, adam.step);
  const params = [sae.wEnc, sae.bEnc, sae.wDec, sae.bDec];
  const gs = [grads.wEnc, grads.bEnc, grads.wDec, grads.bDec];
  const step = lr / c1;
  const sc2 = 1 / Math.sqrt(c2);
  for (let p = 0; p < 4; p++) {
    const w = params[p], g = gs[p], m = adam.m[p], v = adam.v[p];
    for (let i = 0; i < w.length; i++) {
      const gi = g[i];
      const mi = (m[i] = b1 * m[i] + (1 - b1) * gi);
      const vi = (v[i] = b2 * v[i] + (1 - b2) * gi * gi);
      w[i] -= (step * mi) / (Math.sqrt(vi) * sc2 + eps);
    }
  }
  normaliseRows(sae.wDec, sae.features, sae.units);
}
