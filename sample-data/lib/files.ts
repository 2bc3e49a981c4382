/** Byte-exact writers for the probe-set files: NumPy .npy (format 1.0), CSV and the small preview PNGs. */
import { PNG } from 'pngjs';

/**
 * A float32 little-endian .npy file, NumPy format version 1.0: magic "\x93NUMPY", version 1 0,
 * uint16 little-endian header length, then a Python-literal dict padded with spaces and ended by "\n"
 * so the data starts on a multiple of 64 bytes (numpy.lib.format documentation, from memory).
 */
export function encodeNpyFloat32(shape: number[], data: Float32Array): Uint8Array {
  const expected = shape.reduce((a, b) => a * b, 1);
  if (data.length !== expected) throw new Error(`npy: ${data.length} values do not fill shape (${shape.join(', ')})`);
  const shapeText = shape.length === 1 ? `(${shape[0]},)` : `(${shape.join(', ')})`;
  const dict = `{'descr': '<f4', 'fortran_order': False, 'shape': ${shapeText}, }`;
  const preamble = 10; // magic (6) + version (2) + header length (2)
  const padded = Math.ceil((preamble + dict.length + 1) / 64) * 64;
  const header = dict + ' '.repeat(padded - preamble - dict.length - 1) + '\n';
  const out = new Uint8Array(padded + data.length * 4);
  out.set([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0], 0); // \x93 N U M P Y, version 1.0
  const view = new DataView(out.buffer);
  view.setUint16(8, header.length, true);
  for (let k = 0; k < header.length; k++) out[preamble + k] = header.charCodeAt(k);
  for (let k = 0; k < data.length; k++) view.setFloat32(padded + k * 4, data[k], true);
  return out;
}

/** RFC 4180 quoting for a field that holds a comma, quote or line break. */
function csvField(value: string | number): string {
  const text = String(value);
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

export function encodeCsv(header: string[], rows: (string | number)[][]): string {
  return [header, ...rows].map((row) => row.map(csvField).join(',')).join('\n') + '\n';
}

/**
 * One C-order [3,h,w] float tile in [0,1] as an 8-bit RGB PNG, each pixel repeated `scale`×`scale`
 * (nearest neighbour, so a person sees the real pixels). Fixed zlib settings keep the bytes stable.
 */
export function encodeTilePng(tile: Float32Array, height: number, width: number, scale: number): Uint8Array {
  const png = new PNG({ width: width * scale, height: height * scale, colorType: 2, inputColorType: 2, inputHasAlpha: false });
  const rgb = Buffer.alloc(width * scale * height * scale * 3);
  const plane = height * width;
  for (let y = 0; y < height * scale; y++) {
    for (let x = 0; x < width * scale; x++) {
      const src = Math.floor(y / scale) * width + Math.floor(x / scale);
      for (let c = 0; c < 3; c++) rgb[(y * width * scale + x) * 3 + c] = Math.round(tile[c * plane + src] * 255);
    }
  }
  png.data = rgb;
  return new Uint8Array(PNG.sync.write(png, { colorType: 2, inputColorType: 2, inputHasAlpha: false, deflateLevel: 9 }));
}
