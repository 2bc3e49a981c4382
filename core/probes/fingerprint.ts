/**
 * The probe-set fingerprint: SHA-256 over a canonical listing of manifest.json and every file it references.
 * Each entry is framed as `name "\n" byteLength "\n" bytes` so no two listings hash alike by concatenation.
 * Files are streamed in chunks (bounded memory); .npy data is checked for NaN/Inf in the same pass.
 */
import { createHash, type Hash } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { probesError } from './fail.ts';
import { HOST_LITTLE_ENDIAN, swapBytesInPlace, type NpyFile } from './npy.ts';

const CHUNK_BYTES = 4 << 20; // a multiple of every item size

export class FingerprintBuilder {
  private readonly hash: Hash = createHash('sha256');
  private readonly chunk = new Uint8Array(CHUNK_BYTES);

  private frame(name: string, byteLength: number): void {
    this.hash.update(`${name}\n${byteLength}\n`, 'utf8');
  }

  /** Add bytes already in memory (manifest and CSVs, hashed exactly as parsed). */
  addBytes(name: string, bytes: Uint8Array): void {
    this.frame(name, bytes.length);
    this.hash.update(bytes);
  }

  /**
   * Stream a file into the hash. `onFirstChunk` sees the opening bytes (format sniffing);
   * `npy` turns on the NaN/Inf scan of its float data, reported as an error at `where`.
   */
  addFile(name: string, file: string, options: { onFirstChunk?: (head: Uint8Array) => void; npy?: NpyFile; where?: string } = {}): void {
    const fd = fs.openSync(file, 'r');
    try {
      const size = fs.fstatSync(fd).size;
      this.frame(name, size);
      const npy = options.npy && (options.npy.dtype === 'float32' || options.npy.dtype === 'float64' || options.npy.dtype === 'float16') ? options.npy : undefined;
      const dataStart = npy ? npy.dataOffset : 0;
      const dataEnd = npy ? npy.dataOffset + npy.count * npy.rowSize * npy.itemSize : 0;
      let position = 0;
      // Header bytes first, so every later chunk starts on an element boundary of the data.
      if (dataStart > 0) position = this.readChunk(fd, file, 0, dataStart);
      while (position < size) {
        const n = this.readChunk(fd, file, position, Math.min(CHUNK_BYTES, size - position));
        if (position === 0) options.onFirstChunk?.(this.chunk.subarray(0, n));
        if (npy && position < dataEnd) {
          const inData = Math.min(n, dataEnd - position);
          const data = this.chunk.subarray(0, inData);
          const bad = firstNonFinite(data, npy);
          if (bad >= 0) throw nonFiniteError(npy, (position - dataStart) / npy.itemSize + bad, isNaNAt(data, bad, npy), options.where);
        }
        position += n;
      }
    } finally {
      fs.closeSync(fd);
    }
  }

  /** Read `length` bytes at `position` into the chunk buffer and hash them; returns the new position. */
  private readChunk(fd: number, file: string, position: number, length: number): number {
    let done = 0;
    while (done < length) {
      const n = fs.readSync(fd, this.chunk, done, length - done, position + done);
      if (n === 0) throw probesError(file, undefined, `${path.basename(file)} changed while it was being read; close other programs writing to it and reopen the probe set`);
      done += n;
    }
    this.hash.update(this.chunk.subarray(0, length));
    return position + length;
  }

  digest(): string {
    return this.hash.digest('hex');
  }
}

/** Index of the first NaN/±Inf element in `bytes` (whole elements of npy.dtype), or -1. Swaps big-endian data in place. */
function firstNonFinite(bytes: Uint8Array, npy: NpyFile): number {
  if (npy.littleEndian !== HOST_LITTLE_ENDIAN) swapBytesInPlace(bytes, npy.itemSize); // already hashed as read
  if (npy.dtype === 'float16') {
    const halves = new Uint16Array(bytes.buffer, bytes.byteOffset, bytes.length / 2);
    for (let i = 0; i < halves.length; i++) if ((halves[i] & 0x7c00) === 0x7c00) return i; // exponent all ones
    return -1;
  }
  const values = npy.dtype === 'float32'
    ? new Float32Array(bytes.buffer, bytes.byteOffset, bytes.length / 4)
    : new Float64Array(bytes.buffer, bytes.byteOffset, bytes.length / 8);
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (v - v !== 0) return i; // NaN - NaN and Inf - Inf are NaN
  }
  return -1;
}

/** Whether the non-finite element at `index` (host byte order by now) is a NaN rather than ±Inf. */
function isNaNAt(bytes: Uint8Array, index: number, npy: NpyFile): boolean {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (npy.dtype === 'float16') return (view.getUint16(index * 2, HOST_LITTLE_ENDIAN) & 0x3ff) !== 0;
  return Number.isNaN(npy.dtype === 'float32' ? view.getFloat32(index * 4, HOST_LITTLE_ENDIAN) : view.getFloat64(index * 8, HOST_LITTLE_ENDIAN));
}

function nonFiniteError(npy: NpyFile, element: number, isNaN: boolean, where: string | undefined) {
  const probe = Math.floor(element / npy.rowSize);
  const within = element - probe * npy.rowSize;
  return probesError(npy.path, `probe ${probe}`,
    `${path.basename(npy.path)} has ${isNaN ? 'a NaN' : 'an infinite value'} at probe ${probe} (element ${within} of that probe)${where ? ` for ${where}` : ''}; inputs must be finite — fix or drop those probes (e.g. np.nan_to_num) and re-save`);
}
