/**
 * Turns one exposed tensor of a batch into per-unit values.
 *   [B, H]       → H units, as is
 *   [B, C, H, W] → C units (channels), pooled over space; argmax = h*W + w of the pooled value
 *   [B, T, H]    → H units, pooled over T (max, mean or last); argmax = t
 *   other ranks  → prod(dims) units, flattened (the caller warns)
 */
export type Pool = 'max' | 'mean' | 'last';

export interface Pooled {
  /** unit-major: values[u * batch + b] */
  values: Float32Array;
  /** unit-major like values; null when nothing was pooled */
  argmax: Uint32Array | null;
}

export type LayerKind = 'dense' | 'conv' | 'sequence' | 'flat';

export function poolBatch(data: ArrayLike<number>, batch: number, kind: LayerKind, dims: number[], pool: Pool): Pooled {
  if (kind === 'conv') return poolConv(data, batch, dims[0], dims[1] * dims[2], pool);
  if (kind === 'sequence') return poolSequence(data, batch, dims[0], dims[1], pool);
  // dense and flat: transpose sample-major to unit-major
  const units = dims.reduce((a, b) => a * b, 1);
  const values = new Float32Array(units * batch);
  for (let b = 0; b < batch; b++) {
    const base = b * units;
    for (let u = 0; u < units; u++) values[u * batch + b] = data[base + u];
  }
  return { values, argmax: null };
}

function poolConv(data: ArrayLike<number>, batch: number, channels: number, area: number, pool: Pool): Pooled {
  const values = new Float32Array(channels * batch);
  const argmax = new Uint32Array(channels * batch);
  for (let b = 0; b < batch; b++) {
    for (let c = 0; c < channels; c++) {
      const base = (b * channels + c) * area;
      let best = -Infinity;
      let at = 0;
      let sum = 0;
      for (let i = 0; i < area; i++) {
        const v = data[base + i];
        sum += v;
        if (v > best) { best = v; at = i; }
      }
      // "last" has no meaning over space; it falls back to max (documented in the CLI help).
      values[c * batch + b] = pool === 'mean' ? sum / area : best;
      argmax[c * batch + b] = at;
    }
  }
  return { values, argmax };
}

function poolSequence(data: ArrayLike<number>, batch: number, steps: number, units: number, pool: Pool): Pooled {
  const values = new Float32Array(units * batch);
  const argmax = new Uint32Array(units * batch);
  for (let b = 0; b < batch; b++) {
    const base = b * steps * units;
    for (let u = 0; u < units; u++) {
      let best = -Infinity;
      let at = 0;
      let sum = 0;
      for (let t = 0; t < steps; t++) {
        const v = data[base + t * units + u];
        sum += v;
        if (v > best) { best = v; at = t; }
      }
      let value = best;
      if (pool === 'mean') value = sum / steps;
      else if (pool === 'last') { value = data[base + (steps - 1) * units + u]; at = steps - 1; }
      values[u * batch + b] = value;
      argmax[u * batch + b] = at;
    }
  }
  return { values, argmax };
}
