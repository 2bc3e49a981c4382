/**
 * The activation blob codec: how one unit's float32 values for one chunk are stored (`activation.vals`, with
 * `activation.enc` naming the layout). Lossless: a read returns the very float32 bits that were written.
 *
 *   enc 0 (plain)      n float32, little-endian, in probe order: 4·n bytes.
 *   enc 1 (zero mask)  n as uint32 little-endian, ceil(n/8) bytes of mask, then the float32 values whose bits are
 *                      not all zero, in probe order: 4 + n/8 + 4·(non-zero count) bytes.
 *                      Bit i of the mask (byte i >> 3, bit i & 7, least significant first) is 1 when value i is kept.
 *                      Only +0.0 (all bits zero) is left out, so −0.0 and NaN payloads survive unchanged.
 *
 * ReLU-family layers are mostly exact zeros, so the mask form costs 1/8 byte per zero instead of 4. The writer
 * picks the mask form only when it is strictly smaller, so a dense unit never grows. Decoding is one pass over the
 * mask, so per-unit reads stay a plain loop (measured ratios: bench/RESULTS.md, "Storage").
 */

export const ENC_PLAIN = 0;
export const ENC_ZERO_MASK = 1;

export interface Encoded {
  enc: number;
  blob: Buffer;
}

/** Encodes one unit's values for one chunk in the smaller layout. */
export function encodeFloats(values: Float32Array): Encoded {
  const n = values.length;
  const bits = new Uint32Array(values.buffer, values.byteOffset, n);
  let kept = 0;
  for (let i = 0; i < n; i++) if (bits[i] !== 0) kept++;
  const maskBytes = (n + 7) >> 3;
  if (4 + maskBytes + 4 * kept >= 4 * n) return { enc: ENC_PLAIN, blob: Buffer.from(values.buffer, values.byteOffset, values.byteLength) };
  const out = Buffer.alloc(4 + maskBytes + 4 * kept);
  out.writeUInt32LE(n, 0);
  // The kept values go through an aligned array (the Buffer's offset in its pool need not be 4-aligned).
  const keptBits = new Uint32Array(kept);
  for (let i = 0, j = 0; i < n; i++) {
    const b = bits[i];
    if (b !== 0) {
      out[4 + (i >> 3)] |= 1 << (i & 7);
      keptBits[j++] = b;
    }
  }
  out.set(new Uint8Array(keptBits.buffer), 4 + maskBytes);
  return { enc: ENC_ZERO_MASK, blob: out };
}

/** How many values a blob holds. */
export function encodedLength(enc: number, blob: Uint8Array): number {
  if (enc === ENC_PLAIN) return blob.byteLength / 4;
  if (enc === ENC_ZERO_MASK) return new DataView(blob.buffer, blob.byteOffset, blob.byteLength).getUint32(0, true);
  throw new Error(`unknown activation encoding ${enc}`);
}

/** Decodes a blob into out[offset ..); returns how many values it held. */
export function decodeFloatsInto(enc: number, blob: Uint8Array, out: Float32Array, offset = 0): number {
  if (enc === ENC_PLAIN) {
    new Uint8Array(out.buffer, out.byteOffset + offset * 4, blob.byteLength).set(blob);
    return blob.byteLength / 4;
  }
  const n = encodedLength(enc, blob);
  const maskBytes = (n + 7) >> 3;
  const keptCount = (blob.byteLength - 4 - maskBytes) / 4;
  // SQLite's buffer may not be 4-byte aligned: copy the kept values once into an aligned array.
  const kept = new Uint32Array(keptCount);
  new Uint8Array(kept.buffer).set(blob.subarray(4 + maskBytes));
  const dst = new Uint32Array(out.buffer, out.byteOffset + offset * 4, n);
  let j = 0;
  for (let byte = 0; byte < maskBytes; byte++) {
    const m = blob[4 + byte];
    const base = byte << 3;
    const end = Math.min(8, n - base);
    if (m === 0) {
      dst.fill(0, base, base + end);
      continue;
    }
    for (let k = 0; k < end; k++) dst[base + k] = (m >> k) & 1 ? kept[j++] : 0;
  }
  if (j !== keptCount) throw new Error(`activation blob: its mask names ${j} values but it holds ${keptCount}`);
  return n;
}

/** Decodes a blob into a new array. */
export function decodeFloats(enc: number, blob: Uint8Array): Float32Array {
  const out = new Float32Array(encodedLength(enc, blob));
  decodeFloatsInto(enc, blob, out);
  return out;
}
