/**
 * Reader and float32 writer for .npy files, following the NumPy format specification
 * (numpy.lib.format, versions 1.0, 2.0 and 3.0):
 *   magic "\x93NUMPY", major and minor version bytes, header length (uint16 LE in 1.0, uint32 LE in 2.0/3.0),
 *   then a Python dict literal {'descr', 'fortran_order', 'shape'} (latin1 in 1.0/2.0, utf8 in 3.0),
 *   padded with spaces and ended by "\n" so the data starts at a multiple of 64 bytes.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { writeDurably } from '../fs/index.ts';
import { formatShape, probesError } from './fail.ts';
import type { NpyDType } from './types.ts';

export type NpyRows = Float32Array | Float64Array | Int32Array | BigInt64Array | Uint8Array;

export interface NpyHeader {
  version: '1.0' | '2.0' | '3.0';
  /** The descr string as written, e.g. "<f4". */
  descr: string;
  dtype: NpyDType;
  /** Bytes per element in the file. */
  itemSize: number;
  littleEndian: boolean;
  fortranOrder: boolean;
  shape: number[];
  /** Byte offset of the first element (= total header length). */
  dataOffset: number;
}

export interface NpyFile extends NpyHeader {
  path: string;
  /** shape[0]: the number of probes. */
  count: number;
  /** Shape of one probe (shape without the first axis). */
  rowShape: number[];
  /** Elements per probe. */
  rowSize: number;
  /** Rows [start, start+count) as one C-order typed array (see InputSource.readRows for the array types). */
  readRows(start: number, count: number): NpyRows;
}

const MAGIC = [0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59]; // "\x93NUMPY"
export const HOST_LITTLE_ENDIAN = os.endianness() === 'LE';
/** numpy itself refuses headers over 10 000 bytes by default; we allow more but not absurd sizes. */
const MAX_HEADER_BYTES = 1 << 20;

const KIND_TO_DTYPE: Record<string, { dtype: NpyDType; itemSize: number }> = {
  f2: { dtype: 'float16', itemSize: 2 },
  f4: { dtype: 'float32', itemSize: 4 },
  f8: { dtype: 'float64', itemSize: 8 },
  i4: { dtype: 'int32', itemSize: 4 },
  i8: { dtype: 'int64', itemSize: 8 },
  u1: { dtype: 'uint8', itemSize: 1 },
  b1: { dtype: 'bool', itemSize: 1 },
  '?': { dtype: 'bool', itemSize: 1 },
};

const RESAVE_HINT = 're-save it with numpy as float32 (np.save(path, arr.astype(np.float32)))';

/**
 * Parse an .npy header from its first bytes (at least the whole header) or from an open file descriptor.
 * `file` names the file in error messages.
 */
export function readNpyHeader(source: Uint8Array | number, file = '<bytes>'): NpyHeader {
  const bytes = typeof source === 'number' ? readHeaderBytes(source, file) : source;
  const bad = (message: string, where = 'header') => probesError(file, where, message);
  if (bytes.length < 10 || MAGIC.some((b, i) => bytes[i] !== b)) {
    throw bad(`is not a .npy file (it does not start with the NumPy magic bytes "\\x93NUMPY"); save the array with np.save`);
  }
  const major = bytes[6];
  const minor = bytes[7];
  let version: NpyHeader['version'];
  let lengthBytes: number;
  if (major === 1 && minor === 0) [version, lengthBytes] = ['1.0', 2];
  else if (major === 2 && minor === 0) [version, lengthBytes] = ['2.0', 4];
  else if (major === 3 && minor === 0) [version, lengthBytes] = ['3.0', 4];
  else throw bad(`uses .npy format version ${major}.${minor}, which Skein does not read (it reads 1.0, 2.0 and 3.0); re-save it with np.save`);
  const prefix = 8 + lengthBytes;
  if (bytes.length < prefix) throw bad('is truncated inside its header; re-save it with np.save');
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const headerLength = lengthBytes === 2 ? view.getUint16(8, true) : view.getUint32(8, true);
  if (headerLength > MAX_HEADER_BYTES) throw bad(`declares a ${headerLength}-byte header, which is not plausible; the file is damaged — re-save it with np.save`);
  const dataOffset = prefix + headerLength;
  if (bytes.length < dataOffset) throw bad('is truncated inside its header; re-save it with np.save');
  const headerText = new TextDecoder(version === '3.0' ? 'utf-8' : 'latin1').decode(bytes.subarray(prefix, dataOffset));

  let dict: PyValue;
  try {
    dict = parsePythonLiteral(headerText);
  } catch (e) {
    throw bad(`has a header that is not a Python dict literal (${(e as Error).message}); re-save it with np.save`);
  }
  if (typeof dict !== 'object' || dict === null || Array.isArray(dict)) throw bad('has a header that is not a dict; re-save it with np.save');
  const { descr, fortran_order: fortranOrder, shape } = dict as Record<string, PyValue>;
  if (typeof descr !== 'string') {
    throw bad(`holds a structured or unknown dtype (${JSON.stringify(descr)}), which Skein does not read; ${RESAVE_HINT}`, 'header.descr');
  }
  const m = /^([<>|=])([a-z?]\d*)$/.exec(descr);
  const kind = m ? KIND_TO_DTYPE[m[2]] : undefined;
  if (!m || !kind) {
    throw bad(`holds dtype "${descr}", which Skein does not read (it reads float32, float16, float64, int64, int32, uint8 and bool); ${RESAVE_HINT}`, 'header.descr');
  }
  if (typeof fortranOrder !== 'boolean') throw bad('has no boolean fortran_order in its header; re-save it with np.save', 'header.fortran_order');
  if (!Array.isArray(shape) || !shape.every((d) => typeof d === 'number' && Number.isSafeInteger(d) && d >= 0)) {
    throw bad('has no valid shape tuple in its header; re-save it with np.save', 'header.shape');
  }
  // '|' (not applicable) and '=' (native) only occur for one-byte types in files numpy writes.
  const littleEndian = m[1] !== '>';
  return { version, descr, dtype: kind.dtype, itemSize: kind.itemSize, littleEndian, fortranOrder, shape: shape as number[], dataOffset };
}

function readHeaderBytes(fd: number, file: string): Uint8Array {
  const start = new Uint8Array(12);
  const got = fs.readSync(fd, start, 0, 12, 0);
  if (got < 10) return start.subarray(0, got); // readNpyHeader reports "not a .npy file"
  const lengthBytes = start[6] === 1 ? 2 : 4;
  const headerLength = lengthBytes === 2 ? start[8] | (start[9] << 8) : (start[8] | (start[9] << 8) | (start[10] << 16)) + start[11] * 2 ** 24;
  if (headerLength > MAX_HEADER_BYTES) return start; // readNpyHeader reports it
  const all = new Uint8Array(8 + lengthBytes + headerLength);
  const n = readFully(fd, all, 0);
  return all.subarray(0, n);
}

/** Read into `target` from `position` until full or end of file; returns the bytes read. */
function readFully(fd: number, target: Uint8Array, position: number): number {
  let done = 0;
  while (done < target.length) {
    const n = fs.readSync(fd, target, done, target.length - done, position + done);
    if (n === 0) break;
    done += n;
  }
  return done;
}

/** Open an .npy file: parse and check its header and size; rows are read on demand. */
export function openNpy(file: string): NpyFile {
  let fd: number;
  try {
    fd = fs.openSync(file, 'r');
  } catch (e) {
    throw probesError(file, undefined, `cannot be opened (${(e as NodeJS.ErrnoException).code ?? (e as Error).message}); check that the file exists and is readable`);
  }
  let header: NpyHeader;
  let fileSize: number;
  try {
    header = readNpyHeader(fd, file);
    fileSize = fs.fstatSync(fd).size;
  } finally {
    fs.closeSync(fd);
  }
  const name = path.basename(file);
  if (header.fortranOrder) {
    throw probesError(file, 'header.fortran_order',
      `${name} is stored in Fortran (column-major) order, which Skein does not read; re-save it in C order: np.save(path, np.ascontiguousarray(arr))`);
  }
  if (header.shape.length === 0) {
    throw probesError(file, 'header.shape', `${name} holds a single scalar; its first axis must be the probe index (shape [N, ...])`);
  }
  const [count, ...rowShape] = header.shape;
  const rowSize = rowShape.reduce((a, b) => a * b, 1);
  const rowBytes = rowSize * header.itemSize;
  const dataBytes = count * rowBytes;
  if (header.dataOffset + dataBytes > fileSize) {
    throw probesError(file, 'header.shape',
      `${name} is truncated: its header says shape ${formatShape(header.shape)} (${dataBytes} bytes of data) but only ${Math.max(0, fileSize - header.dataOffset)} bytes follow the header; re-save it with np.save`);
  }
  return {
    ...header,
    path: file,
    count,
    rowShape,
    rowSize,
    readRows(start: number, rows: number): NpyRows {
      if (!Number.isInteger(start) || !Number.isInteger(rows) || start < 0 || rows < 0 || start + rows > count) {
        throw new RangeError(`readRows(${start}, ${rows}) is outside 0..${count} of ${file}`);
      }
      const bytes = new Uint8Array(rows * rowBytes); // own buffer, offset 0: aligned for any typed view
      const fdRows = fs.openSync(file, 'r');
      try {
        const got = readFully(fdRows, bytes, header.dataOffset + start * rowBytes);
        if (got < bytes.length) {
          throw probesError(file, undefined, `${name} became shorter after the probe set was opened; reopen the probe set`);
        }
      } finally {
        fs.closeSync(fdRows);
      }
      return decodeNpyElements(bytes, header.dtype, header.littleEndian);
    },
  };
}

/** Swap each `itemSize`-byte element of `bytes` in place (big-endian ↔ little-endian). */
export function swapBytesInPlace(bytes: Uint8Array, itemSize: number): void {
  if (itemSize === 1) return;
  for (let i = 0; i + itemSize <= bytes.length; i += itemSize) {
    for (let a = i, b = i + itemSize - 1; a < b; a++, b--) {
      const t = bytes[a];
      bytes[a] = bytes[b];
      bytes[b] = t;
    }
  }
}

/**
 * Turn raw element bytes (a buffer this module owns, at byteOffset 0) into the typed array readRows promises.
 * Big-endian data is byte-swapped in place first; float16 is widened to float32; bool becomes 0/1 bytes.
 */
export function decodeNpyElements(bytes: Uint8Array, dtype: NpyDType, littleEndian: boolean): NpyRows {
  const itemSize = dtype === 'float16' ? 2 : dtype === 'float32' || dtype === 'int32' ? 4 : dtype === 'float64' || dtype === 'int64' ? 8 : 1;
  if (littleEndian !== HOST_LITTLE_ENDIAN) swapBytesInPlace(bytes, itemSize);
  const n = bytes.length / itemSize;
  switch (dtype) {
    case 'float32': return new Float32Array(bytes.buffer, bytes.byteOffset, n);
    case 'float64': return new Float64Array(bytes.buffer, bytes.byteOffset, n);
    case 'int32': return new Int32Array(bytes.buffer, bytes.byteOffset, n);
    case 'int64': return new BigInt64Array(bytes.buffer, bytes.byteOffset, n);
    case 'uint8': return bytes;
    case 'bool':
      for (let i = 0; i < n; i++) bytes[i] = bytes[i] === 0 ? 0 : 1;
      return bytes;
    case 'float16': {
      const halves = new Uint16Array(bytes.buffer, bytes.byteOffset, n);
      const out = new Float32Array(n);
      for (let i = 0; i < n; i++) out[i] = float16BitsToNumber(halves[i]);
      return out;
    }
  }
}

/** IEEE 754 binary16 → number: 1 sign bit, 5 exponent bits (bias 15), 10 fraction bits. */
export function float16BitsToNumber(bits: number): number {
  const sign = bits & 0x8000 ? -1 : 1;
  const exponent = (bits >> 10) & 0x1f;
  const fraction = bits & 0x3ff;
  if (exponent === 0) return sign * fraction * 2 ** -24; // zero and subnormals: fraction/1024 · 2^-14
  if (exponent === 0x1f) return fraction === 0 ? sign * Infinity : NaN;
  return sign * (1 + fraction / 1024) * 2 ** (exponent - 15);
}

// ---------------------------------------------------------------------------------------------------------
// Writing

/** The header numpy itself writes for a C-order little-endian float32 array (version 1.0; 2.0 when longer). */
export function encodeNpyHeader(dtype: 'float32', shape: number[]): Buffer {
  if (dtype !== 'float32') throw new TypeError(`encodeNpyHeader writes float32 only, not ${String(dtype)}`);
  if (!shape.every((d) => Number.isSafeInteger(d) && d >= 0)) throw new RangeError(`invalid shape ${formatShape(shape)}`);
  const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
  const dict = `{'descr': '<f4', 'fortran_order': False, 'shape': ${shapeText}, }`;
  let prefix = 10; // magic(6) + version(2) + uint16 length
  let total = Math.ceil((prefix + dict.length + 1) / 64) * 64;
  if (total - prefix > 0xffff) {
    prefix = 12; // version 2.0: uint32 length
    total = Math.ceil((prefix + dict.length + 1) / 64) * 64;
  }
  const out = Buffer.alloc(total, 0x20);
  out.set(MAGIC, 0);
  out[6] = prefix === 10 ? 1 : 2;
  out[7] = 0;
  if (prefix === 10) out.writeUInt16LE(total - prefix, 8);
  else out.writeUInt32LE(total - prefix, 8);
  out.write(dict, prefix, 'latin1');
  out[total - 1] = 0x0a;
  return out;
}

/**
 * Write a float32 .npy file with core/fs's durable write (temporary file, fsync, rename, fsync of the folder).
 * `data` is the whole C-order array or an iterable of consecutive chunks (e.g. one block of rows at a time).
 */
export function writeNpyFloat32(file: string, shape: number[], data: Float32Array | Iterable<Float32Array>): void {
  const expected = shape.reduce((a, b) => a * b, 1);
  const header = encodeNpyHeader('float32', shape);
  writeDurably(file, (fd) => {
    writeAll(fd, header);
    let written = 0;
    for (const chunk of data instanceof Float32Array ? [data] : data) {
      if (written + chunk.length > expected) throw new RangeError(`more than ${expected} values given for shape ${formatShape(shape)}`);
      writeAll(fd, float32LittleEndianBytes(chunk));
      written += chunk.length;
    }
    if (written !== expected) throw new RangeError(`${written} values given for shape ${formatShape(shape)}, which needs ${expected}`);
  });
}

function writeAll(fd: number, bytes: Uint8Array): void {
  let done = 0;
  while (done < bytes.length) done += fs.writeSync(fd, bytes, done, bytes.length - done);
}

function float32LittleEndianBytes(values: Float32Array): Uint8Array {
  const view = new Uint8Array(values.buffer, values.byteOffset, values.byteLength);
  if (HOST_LITTLE_ENDIAN) return view;
  const copy = view.slice();
  swapBytesInPlace(copy, 4);
  return copy;
}

// ---------------------------------------------------------------------------------------------------------
// The Python literal subset .npy headers use: dicts, tuples/lists, strings, ints (with Python 2 'L'), booleans, None.

type PyValue = string | number | boolean | null | PyValue[] | { [key: string]: PyValue };

function parsePythonLiteral(text: string): PyValue {
  let i = 0;
  const skip = () => { while (i < text.length && /\s/.test(text[i])) i++; };
  const fail = (what: string): never => { throw new Error(`${what} at character ${i}`); };
  const value = (): PyValue => {
    skip();
    const c = text[i];
    if (c === '{') {
      i++;
      const out: Record<string, PyValue> = {};
      for (;;) {
        skip();
        if (text[i] === '}') { i++; return out; }
        const key = value();
        if (typeof key !== 'string') fail('expected a string key');
        skip();
        if (text[i] !== ':') fail('expected ":"');
        i++;
        out[key as string] = value();
        skip();
        if (text[i] === ',') i++;
        else if (text[i] !== '}') fail('expected "," or "}"');
      }
    }
    if (c === '(' || c === '[') {
      const close = c === '(' ? ')' : ']';
      i++;
      const out: PyValue[] = [];
      for (;;) {
        skip();
        if (text[i] === close) { i++; return out; }
        out.push(value());
        skip();
        if (text[i] === ',') i++;
        else if (text[i] !== close) fail(`expected "," or "${close}"`);
      }
    }
    if (c === "'" || c === '"') {
      i++;
      let s = '';
      while (i < text.length && text[i] !== c) {
        if (text[i] === '\\') i++;
        s += text[i++];
      }
      if (i >= text.length) fail('unterminated string');
      i++;
      return s;
    }
    const word = /^(True|False|None|-?\d+L?)/.exec(text.slice(i, i + 32));
    if (!word) return fail('unexpected text');
    i += word[0].length;
    if (word[0] === 'True') return true;
    if (word[0] === 'False') return false;
    if (word[0] === 'None') return null;
    return Number(word[0].replace(/L$/, ''));
  };
  const result = value();
  skip();
  if (i < text.length) fail('unexpected text after the dict');
  return result;
}
