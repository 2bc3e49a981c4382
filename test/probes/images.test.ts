import fs from 'node:fs';
import path from 'node:path';
import jpeg from 'jpeg-js';
import pngjs from 'pngjs';
import { describe, expect, it } from 'vitest';
import { openProbeSet } from '../../core/probes/index.ts';
import { expectProbesError, numbers, tempDir, writeFiles } from './fixtures.ts';

/** Encode RGB pixels (row-major [r, g, b] triples) as an opaque 8-bit PNG with pngjs. */
function png(width: number, height: number, rgb: number[][]): Buffer {
  const image = new pngjs.PNG({ width, height });
  rgb.forEach(([r, g, b], i) => image.data.set([r, g, b, 255], i * 4));
  return pngjs.PNG.sync.write(image);
}

// 2×2 test image; multiples of 51 so pixel/255 is exact in decimal: 0, .2, .4, .6, .8, 1.
//   (row 0) P00 = (255,   0,  51)   P01 = (  0, 255, 102)
//   (row 1) P10 = ( 51, 102, 153)   P11 = (204, 153, 255)
const PIXELS = [[255, 0, 51], [0, 255, 102], [51, 102, 153], [204, 153, 255]];

function imageSet(preprocess: object, extra: Record<string, string | Uint8Array | object> = {}): string {
  const dir = tempDir();
  writeFiles(dir, {
    'manifest.json': { name: 'tiles', labels: 'labels.csv', examples: 'examples.csv', preprocess: { input: 'pixels', size: [2, 2], ...preprocess } },
    'examples.csv': 'probe,image\n0,img/a.png\n',
    'labels.csv': 'probe,label\n0,tile\n',
    'img/a.png': png(2, 2, PIXELS),
    ...extra,
  });
  return dir;
}

function tensor(preprocess: object): { rowShape: number[]; values: number[] } {
  const set = openProbeSet(imageSet(preprocess));
  const input = set.inputs[0];
  return { rowShape: input.rowShape, values: numbers(input.readRows(0, 1)) };
}

const f32 = (values: number[]) => values.map(Math.fround);

// Expected values: the manifest's preprocess formula (pixel/scale − mean[c]) / std[c] applied by hand to PIXELS,
// with nchw = channel planes of rows, nhwc = per-pixel channel triples (the usual layout meanings; common practice).
describe('preprocess: 2×2 PNG with known pixels', () => {
  it('rgb, nchw (scale 255, mean 0, std 1)', () => {
    expect(tensor({ channels: 'rgb', layout: 'nchw' })).toEqual({
      rowShape: [3, 2, 2],
      values: f32([1, 0, 0.2, 0.8, /* G */ 0, 1, 0.4, 0.6, /* B */ 0.2, 0.4, 0.6, 1]),
    });
  });

  it('bgr, nchw', () => {
    expect(tensor({ channels: 'bgr', layout: 'nchw' }).values).toEqual(f32([0.2, 0.4, 0.6, 1, /* G */ 0, 1, 0.4, 0.6, /* R */ 1, 0, 0.2, 0.8]));
  });

  it('rgb, nhwc', () => {
    expect(tensor({ channels: 'rgb', layout: 'nhwc' })).toEqual({
      rowShape: [2, 2, 3],
      values: f32([1, 0, 0.2, /* P01 */ 0, 1, 0.4, /* P10 */ 0.2, 0.4, 0.6, /* P11 */ 0.8, 0.6, 1]),
    });
  });

  it('bgr, nhwc', () => {
    expect(tensor({ channels: 'bgr', layout: 'nhwc' }).values).toEqual(f32([0.2, 0, 1, /* P01 */ 0.4, 1, 0, /* P10 */ 0.6, 0.4, 0.2, /* P11 */ 1, 0.6, 0.8]));
  });

  it('mean and std per channel, in the order of "channels"', () => {
    const mean = [0.5, 0.25, 0];
    const std = [0.5, 0.25, 2];
    // rgb: R (x−.5)/.5, G (x−.25)/.25, B x/2
    expect(tensor({ channels: 'rgb', mean, std }).values).toEqual(f32([1, -1, -0.6, 0.6, /* G */ -1, 3, 0.6, 1.4, /* B */ 0.1, 0.2, 0.3, 0.5]));
    // bgr: B (x−.5)/.5, G (x−.25)/.25, R x/2
    expect(tensor({ channels: 'bgr', mean, std }).values).toEqual(f32([-0.6, -0.2, 0.2, 1, /* G */ -1, 3, 0.6, 1.4, /* R */ 0.5, 0, 0.1, 0.4]));
    const [a, b, c, d] = tensor({ channels: 'rgb', scale: 1, mean: [100, 0, 0] }).values;
    expect([a, b, c, d]).toEqual(f32([155, -100, -49, 104]));
  });

  it('gray is ITU-R BT.601 luma 0.299 R + 0.587 G + 0.114 B', () => {
    const luma = PIXELS.map(([r, g, b]) => (0.299 * r + 0.587 * g + 0.114 * b) / 255);
    const { rowShape, values } = tensor({ channels: 'gray', mean: [0], std: [1] });
    expect(rowShape).toEqual([1, 2, 2]);
    values.forEach((v, i) => expect(v).toBeCloseTo(luma[i], 6));
  });
});

describe('preprocess: resizing (bilinear, half-pixel centres)', () => {
  it('upsamples 2×2 → 4×4 with weights 1, .75/.25, .25/.75, 1 along each axis', () => {
    // Half-pixel bilinear 2 → 4 samples source coordinates −.25→0 (clamped), .25, .75, 1.25→1, as
    // torch.nn.functional.interpolate(mode="bilinear", align_corners=False) gives [0, .25, .75, 1] for [0, 1] (from memory).
    const dir = imageSet({ size: [4, 4], channels: 'gray', scale: 1 }, { 'img/a.png': png(2, 2, [[0, 0, 0], [100, 100, 100], [200, 200, 200], [100, 100, 100]]) });
    const values = numbers(openProbeSet(dir).inputs[0].readRows(0, 1));
    const expectRow = (y: number, row: number[]) => row.forEach((v, x) => expect(values[y * 4 + x]).toBeCloseTo(v, 3));
    // gray of a gray pixel is the value itself (BT.601 weights sum to 1)
    expectRow(0, [0, 25, 75, 100]);
    expectRow(3, [200, 175, 125, 100]);
    expectRow(1, [50, 62.5, 87.5, 100]); // .75·row0 + .25·row3
  });

  it('downsamples 4×4 → 2×2 to the mean of each 2×2 block and keeps a constant image constant', () => {
    const grid = Array.from({ length: 16 }, (_, i) => { const v = i * 10; return [v, v, v]; });
    const down = numbers(openProbeSet(imageSet({ channels: 'gray', scale: 1 }, { 'img/a.png': png(4, 4, grid) })).inputs[0].readRows(0, 1));
    [25, 45, 105, 125].forEach((v, i) => expect(down[i]).toBeCloseTo(v, 3)); // e.g. (0+10+40+50)/4
    const flat = numbers(openProbeSet(imageSet({ size: [3, 5] }, { 'img/a.png': png(7, 2, new Array(14).fill([51, 102, 153])) })).inputs[0].readRows(0, 1));
    expect(flat).toEqual(f32([...new Array(15).fill(0.2), ...new Array(15).fill(0.4), ...new Array(15).fill(0.6)]));
  });
});

describe('preprocess: probe sets built from images', () => {
  it('decodes JPEG too (lossy: a flat colour comes back within 2 levels)', () => {
    const raw = { width: 16, height: 16, data: Buffer.alloc(16 * 16 * 4) };
    for (let i = 0; i < 256; i++) raw.data.set([100, 150, 200, 255], i * 4);
    const dir = imageSet({ size: [2, 2], scale: 1, layout: 'nhwc' }, { 'img/a.jpg': jpeg.encode(raw, 100).data, 'examples.csv': 'probe,image\n0,img/a.jpg\n' });
    const values = numbers(openProbeSet(dir).inputs[0].readRows(0, 1));
    values.forEach((v, i) => expect(Math.abs(v - [100, 150, 200][i % 3])).toBeLessThanOrEqual(2));
  });

  it('takes N from the images, decodes only the rows asked for, and needs one image per probe', () => {
    const dir = imageSet({}, {
      'examples.csv': 'probe,image\n1,img/b.png\n0,img/a.png\n2,img/c.png\n',
      'img/b.png': png(2, 2, [[0, 0, 0], [0, 0, 0], [0, 0, 0], [255, 255, 255]]),
      'img/c.png': png(1, 1, [[255, 255, 255]]),
    });
    const set = openProbeSet(dir);
    expect(set.count).toBe(3);
    expect(set.inputs).toHaveLength(1);
    expect(set.inputs[0]).toMatchObject({ name: 'pixels', file: path.join(dir, 'examples.csv'), dtype: 'float32', origin: 'images' });
    fs.writeFileSync(path.join(dir, 'img/a.png'), 'damaged after opening');
    expect(numbers(set.inputs[0].readRows(1, 1)).slice(0, 4)).toEqual([0, 0, 0, 1]);
    expect(numbers(set.inputs[0].readRows(2, 1))).toEqual(new Array(12).fill(1));
    expectProbesError(() => set.inputs[0].readRows(0, 1), { file: path.join(dir, 'img/a.png'), where: 'image data', message: /could not be decoded/ });

    const gap = imageSet({}, { 'examples.csv': 'probe,image\n0,img/a.png\n2,img/a.png\n' });
    expectProbesError(() => openProbeSet(gap), { file: path.join(gap, 'examples.csv'), where: undefined, message: /no row for probe 1/ });
    const noImage = imageSet({}, { 'examples.csv': 'probe,image,text\n0,,plain\n' });
    expectProbesError(() => openProbeSet(noImage), { file: path.join(noImage, 'examples.csv'), where: 'line 2', message: /probe 0 has no image/ });
    const gif = imageSet({}, { 'img/a.png': 'GIF89a...' });
    expectProbesError(() => openProbeSet(gif), { file: path.join(gif, 'examples.csv'), where: 'line 2', message: /neither PNG nor JPEG/ });
    const mean = imageSet({ channels: 'gray', mean: [0.5, 0.5, 0.5] });
    expectProbesError(() => openProbeSet(mean), { file: path.join(mean, 'manifest.json'), where: 'preprocess.mean', message: /has 3 values but channels "gray" needs 1/ });
    const layout = imageSet({ layout: 'chw' });
    expectProbesError(() => openProbeSet(layout), { file: path.join(layout, 'manifest.json'), where: 'preprocess.layout', message: /field "preprocess\.layout" is invalid/ });
  });
});
