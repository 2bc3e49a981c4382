/**
 * Image probe sets without numpy: PNG/JPEG files named in examples.csv become a float32 input tensor.
 * Per pixel and channel: (pixel / scale - mean[c]) / std[c], mean/std given in the order of `channels`.
 * Resizing is bilinear with half-pixel centres and no antialiasing (as OpenCV's INTER_LINEAR; from memory),
 * so strong downscaling differs from pipelines that resize with PIL's antialiasing filter.
 * Alpha is dropped; gray is ITU-R BT.601 luma 0.299 R + 0.587 G + 0.114 B.
 */
import fs from 'node:fs';
import path from 'node:path';
import jpeg from 'jpeg-js';
import pngjs from 'pngjs';
import { probesError } from './fail.ts';
import type { PreprocessSpec } from './manifest.ts';
import type { InputSource } from './types.ts';

export interface DecodedImage {
  width: number;
  height: number;
  /** 8-bit RGBA, row-major. */
  rgba: Uint8Array;
}

export type ImageFormat = 'png' | 'jpeg';

/** Sniff the format from the first bytes: PNG signature (RFC 2083 section 3.1) or JPEG SOI marker FF D8 FF. */
export function imageFormat(head: Uint8Array): ImageFormat | null {
  const png = [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a];
  if (head.length >= 8 && png.every((b, i) => head[i] === b)) return 'png';
  if (head.length >= 3 && head[0] === 0xff && head[1] === 0xd8 && head[2] === 0xff) return 'jpeg';
  return null;
}

/** Decode a PNG (any bit depth/colour type, rescaled to 8-bit RGBA by pngjs) or baseline/progressive JPEG. */
export function decodeImage(bytes: Buffer, file: string): DecodedImage {
  const format = imageFormat(bytes);
  const fail = (reason: string) => probesError(file, 'image data',
    `${path.basename(file)} could not be decoded (${reason}); re-save it as an 8-bit PNG or a JPEG`);
  if (!format) throw fail('it is neither PNG nor JPEG');
  try {
    if (format === 'png') {
      const png = pngjs.PNG.sync.read(bytes);
      return { width: png.width, height: png.height, rgba: png.data };
    }
    const img = jpeg.decode(bytes, { useTArray: true, formatAsRGBA: true, maxMemoryUsageInMB: 1024 });
    return { width: img.width, height: img.height, rgba: img.data };
  } catch (e) {
    throw fail((e as Error).message);
  }
}

export interface ResolvedPreprocess {
  input: string;
  height: number;
  width: number;
  scale: number;
  mean: number[];
  std: number[];
  channels: 'rgb' | 'bgr' | 'gray';
  layout: 'nchw' | 'nhwc';
}

/** Fill defaults (mean 0, std 1) and check mean/std have one entry per channel. */
export function resolvePreprocess(spec: PreprocessSpec, manifestFile: string): ResolvedPreprocess {
  const channelCount = spec.channels === 'gray' ? 1 : 3;
  const perChannel = (values: number[] | undefined, field: 'mean' | 'std', fallback: number) => {
    if (values === undefined) return new Array<number>(channelCount).fill(fallback);
    if (values.length !== channelCount) {
      throw probesError(manifestFile, `preprocess.${field}`,
        `preprocess.${field} has ${values.length} value${values.length === 1 ? '' : 's'} but channels "${spec.channels}" needs ${channelCount}, in ${spec.channels === 'gray' ? 'gray' : spec.channels.split('').join(', ')} order`);
    }
    return values;
  };
  return {
    input: spec.input,
    height: spec.size[0],
    width: spec.size[1],
    scale: spec.scale,
    mean: perChannel(spec.mean, 'mean', 0),
    std: perChannel(spec.std, 'std', 1),
    channels: spec.channels,
    layout: spec.layout,
  };
}

/** Shape of one probe's tensor: [C, H, W] for nchw, [H, W, C] for nhwc. */
export function preprocessRowShape(p: ResolvedPreprocess): number[] {
  const c = p.channels === 'gray' ? 1 : 3;
  return p.layout === 'nchw' ? [c, p.height, p.width] : [p.height, p.width, c];
}

/** One bilinear sampling axis: for each output index, the two source indices and the weight of the second. */
function sampleAxis(inSize: number, outSize: number): { lo: Int32Array; hi: Int32Array; weight: Float32Array } {
  const lo = new Int32Array(outSize);
  const hi = new Int32Array(outSize);
  const weight = new Float32Array(outSize);
  const ratio = inSize / outSize;
  for (let o = 0; o < outSize; o++) {
    const s = Math.min(Math.max((o + 0.5) * ratio - 0.5, 0), inSize - 1); // half-pixel centres, edges clamped
    lo[o] = Math.floor(s);
    hi[o] = Math.min(lo[o] + 1, inSize - 1);
    weight[o] = s - lo[o];
  }
  return { lo, hi, weight };
}

/** Resize, convert channels and normalise one image into `out` starting at `offset` (prod(rowShape) values). */
export function preprocessImage(img: DecodedImage, p: ResolvedPreprocess, out: Float32Array, offset: number): void {
  const { height: H, width: W } = p;
  const C = p.channels === 'gray' ? 1 : 3;
  const ys = sampleAxis(img.height, H);
  const xs = sampleAxis(img.width, W);
  const src = img.rgba;
  const rowStride = img.width * 4;
  const pixel = new Float32Array(3);
  for (let y = 0; y < H; y++) {
    const r0 = ys.lo[y] * rowStride;
    const r1 = ys.hi[y] * rowStride;
    const wy = ys.weight[y];
    for (let x = 0; x < W; x++) {
      const c0 = xs.lo[x] * 4;
      const c1 = xs.hi[x] * 4;
      const wx = xs.weight[x];
      for (let k = 0; k < 3; k++) {
        const top = src[r0 + c0 + k] * (1 - wx) + src[r0 + c1 + k] * wx;
        const bottom = src[r1 + c0 + k] * (1 - wx) + src[r1 + c1 + k] * wx;
        pixel[k] = top * (1 - wy) + bottom * wy;
      }
      for (let c = 0; c < C; c++) {
        const value = p.channels === 'gray'
          ? 0.299 * pixel[0] + 0.587 * pixel[1] + 0.114 * pixel[2] // ITU-R BT.601 luma
          : pixel[p.channels === 'rgb' ? c : 2 - c];
        const index = p.layout === 'nchw' ? (c * H + y) * W + x : (y * W + x) * C + c;
        out[offset + index] = (value / p.scale - p.mean[c]) / p.std[c];
      }
    }
  }
}

/** An InputSource that decodes only the requested probes' images on each readRows call. */
export function createImageInput(p: ResolvedPreprocess, examplesFile: string, imageFileByProbe: readonly string[]): InputSource {
  const rowShape = preprocessRowShape(p);
  const rowSize = rowShape.reduce((a, b) => a * b, 1);
  return {
    name: p.input,
    file: examplesFile,
    dtype: 'float32',
    rowShape,
    origin: 'images',
    readRows(start: number, count: number): Float32Array {
      if (!Number.isInteger(start) || !Number.isInteger(count) || start < 0 || count < 0 || start + count > imageFileByProbe.length) {
        throw new RangeError(`readRows(${start}, ${count}) is outside 0..${imageFileByProbe.length} of the images in ${examplesFile}`);
      }
      const out = new Float32Array(count * rowSize);
      for (let i = 0; i < count; i++) {
        const file = imageFileByProbe[start + i];
        let bytes: Buffer;
        try {
          bytes = fs.readFileSync(file);
        } catch {
          throw probesError(file, undefined, `image for probe ${start + i} can no longer be read; reopen the probe set`);
        }
        preprocessImage(decodeImage(bytes, file), p, out, i * rowSize);
      }
      return out;
    },
  };
}
