/** Fixture builders for the probe-set tests: hand-laid .npy bytes, temp folders, error assertions. */
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { expect } from 'vitest';
import { SkeinError } from '../../core/errors.ts';

/**
 * An .npy file laid out by hand per the NumPy format specification (numpy.lib.format), versions 1.0/2.0/3.0:
 * "\x93NUMPY", major, minor, header length (uint16 LE for 1.0, uint32 LE for 2.0/3.0), the dict literal
 * (latin1, or utf8 for 3.0) padded with spaces and ended by "\n" to a multiple of `align` bytes, then the data.
 */
export function npyBytes(opts: {
  major?: 1 | 2 | 3;
  descr: string;
  shape: number[];
  fortran?: boolean;
  data: Uint8Array;
  dictText?: string;
  align?: number;
}): Buffer {
  const major = opts.major ?? 1;
  const shapeText = opts.shape.length === 1 ? `(${opts.shape[0]},)` : `(${opts.shape.join(', ')})`;
  const dict = opts.dictText ?? `{'descr': '${opts.descr}', 'fortran_order': ${opts.fortran ? 'True' : 'False'}, 'shape': ${shapeText}, }`;
  const lengthBytes = major === 1 ? 2 : 4;
  const prefix = 8 + lengthBytes;
  const dictBytes = Buffer.from(dict, major === 3 ? 'utf8' : 'latin1');
  const align = opts.align ?? 64;
  const total = Math.ceil((prefix + dictBytes.length + 1) / align) * align;
  const header = Buffer.alloc(total, 0x20);
  Buffer.from([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, major, 0]).copy(header, 0);
  if (lengthBytes === 2) header.writeUInt16LE(total - prefix, 8);
  else header.writeUInt32LE(total - prefix, 8);
  dictBytes.copy(header, prefix);
  header[total - 1] = 0x0a;
  return Buffer.concat([header, opts.data]);
}

export function f4(values: number[], bigEndian = false): Buffer {
  const b = Buffer.alloc(values.length * 4);
  values.forEach((v, i) => (bigEndian ? b.writeFloatBE(v, i * 4) : b.writeFloatLE(v, i * 4)));
  return b;
}

export function f8(values: number[], bigEndian = false): Buffer {
  const b = Buffer.alloc(values.length * 8);
  values.forEach((v, i) => (bigEndian ? b.writeDoubleBE(v, i * 8) : b.writeDoubleLE(v, i * 8)));
  return b;
}

export function i8(values: bigint[]): Buffer {
  const b = Buffer.alloc(values.length * 8);
  values.forEach((v, i) => b.writeBigInt64LE(v, i * 8));
  return b;
}

export function i4(values: number[]): Buffer {
  const b = Buffer.alloc(values.length * 4);
  values.forEach((v, i) => b.writeInt32LE(v, i * 4));
  return b;
}

/** Raw binary16 bit patterns, little-endian. */
export function f2bits(bits: number[]): Buffer {
  const b = Buffer.alloc(bits.length * 2);
  bits.forEach((v, i) => b.writeUInt16LE(v, i * 2));
  return b;
}

export function tempDir(): string {
  return fs.mkdtempSync(path.join(os.tmpdir(), 'skein-probes-'));
}

/** Write files (path → content) into dir; objects are written as JSON. */
export function writeFiles(dir: string, files: Record<string, string | Uint8Array | object>): void {
  for (const [rel, content] of Object.entries(files)) {
    const file = path.join(dir, rel);
    fs.mkdirSync(path.dirname(file), { recursive: true });
    if (typeof content === 'string' || content instanceof Uint8Array) fs.writeFileSync(file, content);
    else fs.writeFileSync(file, JSON.stringify(content, null, 2));
  }
}

/** A valid probe set: x.npy float32 [6, 2] with values 0..11, labels on every probe. Override any file. */
export function probeSetDir(files: Record<string, string | Uint8Array | object> = {}): string {
  const dir = tempDir();
  writeFiles(dir, {
    'manifest.json': { name: 'shapes', inputs: { x: 'x.npy' }, labels: 'labels.csv' },
    'x.npy': npyBytes({ descr: '<f4', shape: [6, 2], data: f4([0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]) }),
    'labels.csv': 'probe,label\n0,round\n1,round\n2,square\n3,square\n4,round\n4,red\n5,square\n',
    ...files,
  });
  return dir;
}

/** Run fn, expect a SkeinError('probes') at file/where whose message matches. */
export function expectProbesError(fn: () => unknown, expected: { file: string; where?: string; message: RegExp }): SkeinError {
  let caught: unknown;
  try {
    fn();
  } catch (e) {
    caught = e;
  }
  expect(caught, 'expected a SkeinError to be thrown').toBeInstanceOf(SkeinError);
  const err = caught as SkeinError;
  expect(err.code).toBe('probes');
  expect(err.file).toBe(expected.file);
  expect(err.where).toBe(expected.where);
  expect(err.message).toMatch(expected.message);
  return err;
}

/** True when python3 with numpy is installed (used only for the optional numpy.load cross-checks). */
export function hasNumpy(): boolean {
  try {
    execFileSync('python3', ['-c', 'import numpy'], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
}

/** A readRows result as plain numbers (not for int64, which is BigInt). */
export function numbers(rows: ArrayLike<number> | BigInt64Array): number[] {
  return Array.from(rows as ArrayLike<number>);
}
