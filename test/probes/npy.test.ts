import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { encodeNpyHeader, float16BitsToNumber, openNpy, readNpyHeader, writeNpyFloat32 } from '../../core/probes/index.ts';
import { expectProbesError, f2bits, f4, f8, hasNumpy, i4, i8, npyBytes, tempDir, numbers } from './fixtures.ts';

function npyFile(bytes: Uint8Array, name = 'a.npy'): string {
  const file = path.join(tempDir(), name);
  fs.writeFileSync(file, bytes);
  return file;
}

const NUMPY = hasNumpy();
if (!NUMPY) console.warn('SKIPPED: python3 with numpy is not installed — the numpy.load cross-checks of the .npy writer and reader do not run');

describe('readNpyHeader: NumPy format specification (numpy.lib.format), version 1.0/2.0/3.0', () => {
  it('reads a version 1.0 header: uint16 length, <f4, C order', () => {
    const bytes = npyBytes({ major: 1, descr: '<f4', shape: [3, 4], data: f4(new Array(12).fill(0)) });
    const h = readNpyHeader(bytes);
    expect(h).toMatchObject({ version: '1.0', descr: '<f4', dtype: 'float32', itemSize: 4, littleEndian: true, fortranOrder: false, shape: [3, 4], dataOffset: 128 });
  });

  it('reads version 2.0 (uint32 header length) and 3.0 (utf8 header) the same way', () => {
    for (const major of [2, 3] as const) {
      const h = readNpyHeader(npyBytes({ major, descr: '>f4', shape: [2], data: f4([1, 2], true) }));
      expect(h).toMatchObject({ version: `${major}.0`, dtype: 'float32', littleEndian: false, shape: [2], dataOffset: 128 });
    }
  });

  it('reads headers numpy wrote long ago: 16-byte padding and Python 2 long ints "3L" (from memory)', () => {
    const h = readNpyHeader(npyBytes({ descr: '<f8', shape: [3, 1], dictText: "{'descr': '<f8', 'fortran_order': False, 'shape': (3L, 1L), }", align: 16, data: f8([1, 2, 3]) }));
    expect(h.shape).toEqual([3, 1]);
    expect(h.dataOffset % 16).toBe(0);
  });

  it('maps each supported descr to its dtype and item size', () => {
    const cases: [string, string, number][] = [
      ['<f2', 'float16', 2], ['<f4', 'float32', 4], ['<f8', 'float64', 8], ['<i4', 'int32', 4],
      ['<i8', 'int64', 8], ['|u1', 'uint8', 1], ['|b1', 'bool', 1],
    ];
    for (const [descr, dtype, itemSize] of cases) {
      expect(readNpyHeader(npyBytes({ descr, shape: [0], data: new Uint8Array(0) }))).toMatchObject({ dtype, itemSize });
    }
  });

  it('refuses files without the magic, unknown versions and unsupported dtypes', () => {
    expectProbesError(() => readNpyHeader(Buffer.from('PK\x03\x04 not numpy at all'), '/x/a.npy'), { file: '/x/a.npy', where: 'header', message: /not a \.npy file/ });
    const v4 = npyBytes({ descr: '<f4', shape: [1], data: f4([1]) });
    v4[6] = 4;
    expectProbesError(() => readNpyHeader(v4, '/x/a.npy'), { file: '/x/a.npy', where: 'header', message: /version 4\.0/ });
    expectProbesError(() => readNpyHeader(npyBytes({ descr: '<U8', shape: [1], data: new Uint8Array(32) }), '/x/a.npy'),
      { file: '/x/a.npy', where: 'header.descr', message: /dtype "<U8".*astype\(np\.float32\)/ });
  });
});

describe('openNpy / readRows', () => {
  it('reads <f4 rows from any offset', () => {
    const file = npyFile(npyBytes({ descr: '<f4', shape: [3, 2], data: f4([0.5, 1.5, -2, 3, 4.25, -5]) }));
    const npy = openNpy(file);
    expect(npy).toMatchObject({ count: 3, rowShape: [2], rowSize: 2, fortranOrder: false });
    expect(numbers(npy.readRows(0, 3))).toEqual([0.5, 1.5, -2, 3, 4.25, -5]);
    expect(numbers(npy.readRows(1, 1))).toEqual([-2, 3]);
    expect(npy.readRows(3, 0).length).toBe(0);
    expect(() => npy.readRows(2, 2)).toThrow(RangeError);
  });

  it('byte-swaps big-endian >f4 and >f8 data on read', () => {
    expect(numbers(openNpy(npyFile(npyBytes({ major: 2, descr: '>f4', shape: [2], data: f4([1.25, -3.5], true) }))).readRows(0, 2))).toEqual([1.25, -3.5]);
    expect(numbers(openNpy(npyFile(npyBytes({ major: 3, descr: '>f8', shape: [2, 1], data: f8([Math.PI, -1e300], true) }))).readRows(0, 2))).toEqual([Math.PI, -1e300]);
  });

  it('returns int64 as BigInt64Array, int32 as Int32Array, |b1 as 0/1 Uint8Array', () => {
    const ints = openNpy(npyFile(npyBytes({ descr: '<i8', shape: [3], data: i8([1n, -2n, 9007199254740993n]) }))).readRows(0, 3);
    expect(ints).toBeInstanceOf(BigInt64Array);
    expect(Array.from(ints as BigInt64Array)).toEqual([1n, -2n, 9007199254740993n]);
    expect(numbers(openNpy(npyFile(npyBytes({ descr: '<i4', shape: [2], data: i4([-7, 2147483647]) }))).readRows(0, 2))).toEqual([-7, 2147483647]);
    const bools = openNpy(npyFile(npyBytes({ descr: '|b1', shape: [2, 2], data: Uint8Array.from([1, 0, 0, 1]) }))).readRows(0, 2);
    expect(bools).toBeInstanceOf(Uint8Array);
    expect(numbers(bools)).toEqual([1, 0, 0, 1]);
  });

  it('widens <f2 to float32 with IEEE 754 binary16 values', () => {
    // IEEE 754-2008 binary16 bit patterns and values as tabulated in the Wikipedia article "Half-precision
    // floating-point format" (from memory; every pattern is also checked against numpy below): 0x3C00 = 1, 0xC000 = -2, 0x7BFF = 65504 (largest normal),
    // 0x0400 = 2^-14 (smallest normal), 0x0001 = 2^-24 (smallest subnormal), 0x3555 = 0.333251953125,
    // 0x7C00 = +Inf, 0xFC00 = -Inf, 0x8000 = -0.
    const bits = [0x3c00, 0xc000, 0x7bff, 0x0400, 0x0001, 0x3555, 0x7c00, 0xfc00, 0x8000];
    const expected = [1, -2, 65504, 2 ** -14, 2 ** -24, 0.333251953125, Infinity, -Infinity, -0];
    const rows = openNpy(npyFile(npyBytes({ descr: '<f2', shape: [bits.length], data: f2bits(bits) }))).readRows(0, bits.length);
    expect(rows).toBeInstanceOf(Float32Array);
    expect(numbers(rows)).toEqual(expected.map(Math.fround));
    expect(Object.is(rows[8], -0)).toBe(true);
    expect(Number.isNaN(float16BitsToNumber(0x7e00))).toBe(true); // exponent all ones, fraction ≠ 0: NaN
  });

  it.skipIf(!NUMPY)('widens every one of the 65 536 binary16 patterns as numpy does (reference: numpy float16 → float32)', () => {
    const py = 'import numpy as np, sys; a = np.arange(65536, dtype="<u2").view("<f2").astype("<f4"); sys.stdout.write(a.view("<u4").tobytes().hex())';
    const expected = new Uint32Array(new Uint8Array(Buffer.from(execFileSync('/usr/bin/python3', ['-c', py], { maxBuffer: 1 << 22 }).toString(), 'hex')).buffer);
    const ours = new Float32Array(65536);
    for (let b = 0; b < 65536; b++) ours[b] = float16BitsToNumber(b);
    const bits = new Uint32Array(ours.buffer);
    const differ: number[] = [];
    // NaN payloads may differ between converters; every NaN must still be a NaN.
    for (let b = 0; b < 65536; b++) if (bits[b] !== expected[b] && !(Number.isNaN(ours[b]) && Number.isNaN(new Float32Array(expected.buffer)[b]))) differ.push(b);
    expect(differ).toEqual([]);
  });

  it('refuses Fortran order, saying to re-save with np.ascontiguousarray', () => {
    const file = npyFile(npyBytes({ descr: '<f4', shape: [2, 2], fortran: true, data: f4([1, 2, 3, 4]) }));
    expectProbesError(() => openNpy(file), { file, where: 'header.fortran_order', message: /Fortran.*np\.ascontiguousarray/ });
  });

  it('refuses a truncated file and a scalar without a probe axis', () => {
    const truncated = npyFile(npyBytes({ descr: '<f4', shape: [4, 2], data: f4([1, 2, 3]) }));
    expectProbesError(() => openNpy(truncated), { file: truncated, where: 'header.shape', message: /truncated.*32 bytes.*only 12/ });
    const scalar = npyFile(npyBytes({ descr: '<f4', shape: [], dictText: "{'descr': '<f4', 'fortran_order': False, 'shape': (), }", data: f4([1]) }));
    expectProbesError(() => openNpy(scalar), { file: scalar, where: 'header.shape', message: /first axis must be the probe index/ });
  });
});

describe('encodeNpyHeader / writeNpyFloat32', () => {
  it('lays out the header as the spec requires: magic, 1.0, uint16 length, dict, spaces, "\\n", total % 64 = 0', () => {
    for (const shape of [[3, 4], [5], [0, 7, 2], Array.from({ length: 40 }, () => 1)]) {
      const h = encodeNpyHeader('float32', shape);
      expect(h.length % 64).toBe(0);
      expect(h[h.length - 1]).toBe(0x0a);
      expect([...h.subarray(0, 8)]).toEqual([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
      expect(h.readUInt16LE(8)).toBe(h.length - 10);
      const text = h.subarray(10).toString('latin1');
      const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
      // The dict text numpy's own writer produces (numpy.lib.format._write_array_header; from memory, and compared
      // byte for byte with numpy.save in the next test).
      expect(text.trimEnd()).toBe(`{'descr': '<f4', 'fortran_order': False, 'shape': ${shapeText}, }`);
      expect(text).toMatch(/^\{[^\n]*\} *\n$/);
    }
  });

  it.skipIf(!NUMPY)('writes the same header bytes as numpy.save (reference: numpy)', () => {
    // 32 axes is numpy's limit (NPY_MAXDIMS); 30 ones still make a header longer than one 64-byte block.
    for (const shape of [[3, 4], [5], [0, 7, 2], Array.from({ length: 30 }, () => 1)]) {
      const py = `import io, sys, numpy as np; b = io.BytesIO(); np.save(b, np.zeros(${JSON.stringify(shape)}, dtype="<f4")); v = b.getvalue(); sys.stdout.write(v[:len(v) - ${shape.reduce((a, b) => a * b, 1) * 4}].hex())`;
      expect(encodeNpyHeader('float32', shape).toString('hex'), JSON.stringify(shape)).toBe(execFileSync('/usr/bin/python3', ['-c', py]).toString());
    }
  });

  it('round-trips through openNpy, from one array or from row chunks, leaving no .tmp behind', () => {
    const dir = tempDir();
    const file = path.join(dir, 'acts.npy');
    const values = Float32Array.from({ length: 24 }, (_, i) => i * 0.5 - 3);
    writeNpyFloat32(file, [4, 3, 2], values);
    const npy = openNpy(file);
    expect(npy).toMatchObject({ dtype: 'float32', shape: [4, 3, 2], littleEndian: true, dataOffset: 128 });
    expect(numbers(npy.readRows(0, 4))).toEqual(Array.from(values));

    function* rows() { for (let r = 0; r < 4; r++) yield values.subarray(r * 6, r * 6 + 6); }
    writeNpyFloat32(file, [4, 6], rows());
    expect(numbers(openNpy(file).readRows(1, 2))).toEqual(Array.from(values.subarray(6, 18)));
    expect(fs.readdirSync(dir)).toEqual(['acts.npy']);
  });

  it('leaves the existing file untouched when the values do not fill the shape', () => {
    const dir = tempDir();
    const file = path.join(dir, 'acts.npy');
    writeNpyFloat32(file, [2], Float32Array.of(1, 2));
    const before = fs.readFileSync(file);
    expect(() => writeNpyFloat32(file, [3], Float32Array.of(1, 2))).toThrow(/2 values given for shape \[3\]/);
    expect(fs.readFileSync(file).equals(before)).toBe(true);
    expect(fs.readdirSync(path.dirname(file))).toEqual(['acts.npy']); // no temporary file of the durable write is left
  });

  it.skipIf(!NUMPY)('writes files numpy.load reads (reference: numpy)', () => {
    const file = path.join(tempDir(), 'acts.npy');
    writeNpyFloat32(file, [2, 3], Float32Array.of(1, -2.5, 3, 0.125, 5, 6));
    const out = execFileSync('python3', ['-c',
      'import sys, numpy as np; a = np.load(sys.argv[1]); print(a.dtype, a.shape, a.flags["C_CONTIGUOUS"], a.ravel().tolist())', file]).toString().trim();
    expect(out).toBe('float32 (2, 3) True [1.0, -2.5, 3.0, 0.125, 5.0, 6.0]');
  });

  it.skipIf(!NUMPY)('reads what numpy.save writes: >f4, <f2, <i8, |b1 (reference: numpy)', () => {
    const dir = tempDir();
    execFileSync('python3', ['-c', [
      'import sys, os, numpy as np',
      'd = sys.argv[1]',
      "np.save(os.path.join(d, 'be.npy'), np.array([[1.5, -2], [3, 1e-3]], dtype='>f4'))",
      "np.save(os.path.join(d, 'half.npy'), np.array([1, -2, 65504, 0.1], dtype='<f2'))",
      "np.save(os.path.join(d, 'long.npy'), np.array([-5, 2**40], dtype='<i8'))",
      "np.save(os.path.join(d, 'mask.npy'), np.array([True, False, True]))",
    ].join('\n'), dir]);
    expect(numbers(openNpy(path.join(dir, 'be.npy')).readRows(0, 2))).toEqual([1.5, -2, 3, Math.fround(1e-3)]);
    // numpy rounds 0.1 to binary16 0x2E66 = 0.0999755859375 (IEEE 754 round-to-nearest)
    expect(numbers(openNpy(path.join(dir, 'half.npy')).readRows(0, 4))).toEqual([1, -2, 65504, 0.0999755859375]);
    expect(Array.from(openNpy(path.join(dir, 'long.npy')).readRows(0, 2) as BigInt64Array)).toEqual([-5n, 2n ** 40n]);
    expect(numbers(openNpy(path.join(dir, 'mask.npy')).readRows(0, 3))).toEqual([1, 0, 1]);
  });
});
