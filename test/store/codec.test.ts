/**
 * The activation blob codec (core/store/codec.ts) is lossless: every float32 bit pattern written is read back,
 * −0.0, NaN payloads, infinities and subnormals included; and its documented layout is what an independent reader
 * makes of it: numpy's unpackbits(bitorder="little") over the mask and frombuffer("<f4") over the kept values
 * (Debian's /usr/bin/python3 with python3-numpy).
 */
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { decodeFloats, decodeFloatsInto, encodeFloats, ENC_PLAIN, ENC_ZERO_MASK } from '../../core/store/codec.ts';
import { tempDir } from '../support/fixtures.ts';
import { openStudyDb, syncLevel } from '../../core/store/study.ts';
import { bindStudy, insertLayer, readBinding } from '../../core/store/binding.ts';
import { readChunkSample, readLayerChunk, readUnit, writeChunk } from '../../core/store/activations.ts';

function fromBits(bits: number[]): Float32Array {
  return new Float32Array(Uint32Array.from(bits).buffer);
}

function bitsOf(a: Float32Array): number[] {
  return Array.from(new Uint32Array(a.buffer, a.byteOffset, a.length));
}

/** ReLU-like values: a share of exact zeros, the rest positive. */
function reluLike(n: number, zeroShare: number, seed: number): Float32Array {
  let s = seed >>> 0;
  const rand = () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
  return Float32Array.from({ length: n }, () => (rand() < zeroShare ? 0 : rand() * 5));
}

describe('activation codec', () => {
  it('round-trips every special bit pattern exactly', () => {
    const special = fromBits([0x00000000, 0x80000000, 0x7fc00000, 0x7fc00001, 0xffc12345, 0x7f800000, 0xff800000, 0x00000001, 0x007fffff, 0x3f800000, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0]);
    const e = encodeFloats(special);
    expect(e.enc).toBe(ENC_ZERO_MASK); // 12 zeros of 21 values: 4 + 3 + 36 bytes < 84
    expect(e.blob.byteLength).toBe(4 + 3 + 4 * 9);
    expect(bitsOf(decodeFloats(e.enc, e.blob))).toEqual(bitsOf(special));
  });

  it('round-trips lengths that are not multiples of 8, all-zero and dense units, and decodes at an offset', () => {
    for (const n of [0, 1, 7, 8, 9, 250, 1023, 1024]) {
      for (const share of [0, 0.5, 0.9, 1]) {
        const v = reluLike(n, share, n * 10 + share * 100);
        const e = encodeFloats(v);
        const zeros = v.filter((x) => x === 0).length;
        const maskSize = 4 + Math.ceil(n / 8) + 4 * (n - zeros);
        // the smaller layout, never larger than plain float32
        expect(e.blob.byteLength).toBe(Math.min(maskSize < 4 * n ? maskSize : 4 * n, 4 * n));
        expect(e.enc).toBe(maskSize < 4 * n ? ENC_ZERO_MASK : ENC_PLAIN);
        const out = new Float32Array(n + 5).fill(-1);
        expect(decodeFloatsInto(e.enc, e.blob, out, 3)).toBe(n);
        expect(bitsOf(out.subarray(3, 3 + n))).toEqual(bitsOf(v));
        expect(Array.from(out.subarray(0, 3))).toEqual([-1, -1, -1]);
        expect(Array.from(out.subarray(3 + n))).toEqual([-1, -1]);
      }
    }
  });

  it('decodes from an unaligned buffer (SQLite hands back blobs at any offset)', () => {
    const v = reluLike(100, 0.6, 3);
    const e = encodeFloats(v);
    const shifted = Buffer.alloc(e.blob.byteLength + 1);
    e.blob.copy(shifted, 1);
    expect(bitsOf(decodeFloats(e.enc, shifted.subarray(1)))).toEqual(bitsOf(v));
  });

  it('rejects a blob whose mask and values disagree', () => {
    const e = encodeFloats(reluLike(64, 0.7, 9));
    const cut = e.blob.subarray(0, e.blob.byteLength - 4);
    expect(() => decodeFloats(e.enc, cut)).toThrow(/its mask names \d+ values but it holds \d+/);
    expect(() => decodeFloats(7, e.blob)).toThrow('unknown activation encoding 7');
  });

  it('has the documented layout, read back by numpy', () => {
    const v = reluLike(1000, 0.55, 17);
    v[3] = -0;
    const e = encodeFloats(v);
    expect(e.enc).toBe(ENC_ZERO_MASK);
    const dir = tempDir();
    fs.writeFileSync(path.join(dir, 'blob.bin'), e.blob);
    fs.writeFileSync(path.join(dir, 'want.bin'), Buffer.from(v.buffer));
    const script = [
      'import numpy as np, sys',
      'b = open(sys.argv[1] + "/blob.bin", "rb").read()',
      'n = int(np.frombuffer(b[:4], "<u4")[0])',
      'mb = (n + 7) // 8',
      'mask = np.unpackbits(np.frombuffer(b[4:4 + mb], np.uint8), bitorder="little")[:n].astype(bool)',
      'out = np.zeros(n, "<u4")',
      'out[mask] = np.frombuffer(b[4 + mb:], "<u4")',
      'want = np.fromfile(sys.argv[1] + "/want.bin", "<u4")',
      'print(n, int(mask.sum()), bool(np.array_equal(out, want)))',
    ].join('\n');
    const r = spawnSync('/usr/bin/python3', ['-c', script, dir], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const kept = v.filter((x) => !Object.is(x, 0)).length;
    expect(r.stdout.trim()).toBe(`1000 ${kept} True`);
  });

  it('a study returns exactly the float32 values the scan wrote, unit by unit and chunk by chunk', () => {
    const file = path.join(tempDir(), 'codec.study');
    const db = openStudyDb(file, { create: true });
    try {
      const n = 2500;
      const chunkSize = 1024;
      bindStudy(db, { path: 'm.onnx', fingerprint: 'm', json: '{}' },
        { dir: 'p', fingerprint: 'p', name: 'p', count: n, labels: [], labelOffsets: new Int32Array(n + 1), labelIds: new Int32Array(0), concepts: null, examples: null, relatedness: null }, chunkSize);
      const units = 6;
      const layerId = insertLayer(db, { name: 'h', op: 'Relu', node: 'h', position: 0, dims: [units], kind: 'dense', units, pool: 'none' });
      // unit u has zero share u/5: 0 (plain layout) … 1 (all zeros); unit 3 carries −0 and a NaN payload.
      const all = Array.from({ length: units }, (_, u) => reluLike(n, u / 5, 100 + u));
      all[3][10] = -0;
      all[3][2000] = fromBits([0x7fc0beef])[0];
      for (let c = 0; c * chunkSize < n; c++) {
        const length = Math.min(chunkSize, n - c * chunkSize);
        const values = new Float32Array(units * length);
        for (let u = 0; u < units; u++) values.set(all[u].subarray(c * chunkSize, c * chunkSize + length), u * length);
        writeChunk(db, c, length, [{ layerId, units, values, argmax: null }]);
      }
      // activation commits use synchronous=NORMAL (a cache resume recomputes) and hand the connection back at FULL (2),
      // the level review annotations are written at
      expect(syncLevel(db)).toBe(2);
      const binding = readBinding(db)!;
      for (let u = 0; u < units; u++) expect(bitsOf(readUnit(db, binding, layerId, u))).toEqual(bitsOf(all[u]));
      const lastChunk = readLayerChunk(db, layerId, 2);
      for (let u = 0; u < units; u++) expect(bitsOf(lastChunk[u])).toEqual(bitsOf(all[u].subarray(2048)));
      for (const s of readChunkSample(db, layerId, [1], 3)) expect(bitsOf(s.values)).toEqual(bitsOf(all[3].subarray(1024, 2048)));
    } finally {
      db.close();
    }
  });
});
