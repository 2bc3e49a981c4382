/**
 * The committed demo files read back with general-purpose readers (csv-parse, pngjs, onnxruntime-node)
 * and a .npy reader written here from the NumPy format description, independent of the writer.
 */
import fs from 'node:fs';
import path from 'node:path';
import { parse } from 'csv-parse/sync';
import * as ort from 'onnxruntime-node';
import { PNG } from 'pngjs';
import { describe, expect, it } from 'vitest';

const DIR = path.resolve(__dirname, '../../sample-data/tiles');
const MODEL = path.resolve(__dirname, '../../sample-data/tiles-model.onnx');

function csv(file: string): Record<string, string>[] {
  return parse(fs.readFileSync(path.join(DIR, file)), { columns: true, skip_empty_lines: true });
}

/** NumPy format 1.0 (numpy.lib.format docs, from memory): magic, version, uint16 LE header length, dict, data. */
function readNpy(file: string): { header: string; dataOffset: number; shape: number[]; data: Float32Array } {
  const bytes = fs.readFileSync(file);
  expect([...bytes.subarray(0, 8)]).toEqual([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
  const headerLength = bytes.readUInt16LE(8);
  const header = bytes.subarray(10, 10 + headerLength).toString('latin1');
  const shapeText = /'shape': \(([^)]*)\)/.exec(header)![1];
  const shape = shapeText.split(',').map((s) => s.trim()).filter(Boolean).map(Number);
  const dataOffset = 10 + headerLength;
  const data = new Float32Array(shape.reduce((a, b) => a * b, 1));
  for (let k = 0; k < data.length; k++) data[k] = bytes.readFloatLE(dataOffset + 4 * k);
  return { header, dataOffset, shape, data };
}

describe('committed tiles probe set', () => {
  const manifest = JSON.parse(fs.readFileSync(path.join(DIR, 'manifest.json'), 'utf8'));
  const npy = readNpy(path.join(DIR, 'tile.npy'));
  const count = npy.shape[0];

  it('has the manifest, npy header and sizes the probe-set format asks for', () => {
    expect(manifest).toEqual({
      name: 'tiles', inputs: { tile: 'tile.npy' }, labels: 'labels.csv', concepts: 'concepts.csv', examples: 'examples.csv',
    });
    expect(npy.header).toMatch(/^\{'descr': '<f4', 'fortran_order': False, 'shape': \(\d+, 3, 12, 12\), \} *\n$/);
    expect(npy.dataOffset % 64).toBe(0); // data aligned to 64 bytes (NumPy format 1.0, from memory)
    expect(fs.statSync(path.join(DIR, 'tile.npy')).size).toBe(npy.dataOffset + count * 3 * 12 * 12 * 4);
    expect(count).toBeGreaterThanOrEqual(1000);
    let total = 0;
    const walk = (d: string) => fs.readdirSync(d, { withFileTypes: true }).forEach((e) => {
      const full = path.join(d, e.name);
      if (e.isDirectory()) walk(full); else total += fs.statSync(full).size;
    });
    walk(DIR);
    total += fs.statSync(MODEL).size;
    expect(total).toBeLessThan(5e6);
  });

  it('gives every probe exactly one label from each family, all defined in concepts.csv', () => {
    const concepts = csv('concepts.csv');
    expect(Object.keys(concepts[0])).toEqual(['label', 'group', 'parent', 'description']);
    const groupOf = new Map(concepts.map((c) => [c.label, c.group]));
    expect(new Set(groupOf.values())).toEqual(new Set(['hue', 'form', 'place']));
    const perProbe = new Map<number, string[]>();
    for (const row of csv('labels.csv')) {
      const probe = Number(row.probe);
      expect(Number.isInteger(probe) && probe >= 0 && probe < count).toBe(true);
      expect(groupOf.has(row.label), row.label).toBe(true);
      perProbe.set(probe, [...(perProbe.get(probe) ?? []), groupOf.get(row.label)!]);
    }
    expect(perProbe.size).toBe(count);
    for (const groups of perProbe.values()) expect(groups.sort()).toEqual(['form', 'hue', 'place']);
  });

  it('has one preview PNG per probe showing that tile ×4 (read back with pngjs)', () => {
    const examples = csv('examples.csv');
    expect(examples.length).toBe(count);
    for (const probe of [0, 1, count - 1]) {
      const row = examples[probe];
      expect(Number(row.probe)).toBe(probe);
      const bytes = fs.readFileSync(path.join(DIR, row.image));
      // PNG signature and IHDR colour type 2 = truecolour, bit depth 8 (W3C PNG spec, 5.2 and 11.2.2)
      expect([...bytes.subarray(0, 8)]).toEqual([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a]);
      expect([bytes[24], bytes[25]]).toEqual([8, 2]);
      const image = PNG.sync.read(bytes);
      expect([image.width, image.height]).toEqual([48, 48]);
      for (const [x, y] of [[0, 0], [17, 30], [47, 47]]) {
        for (let c = 0; c < 3; c++) {
          const value = npy.data[probe * 432 + c * 144 + Math.floor(y / 4) * 12 + Math.floor(x / 4)];
          expect(image.data[(y * 48 + x) * 4 + c]).toBe(Math.round(value * 255));
        }
      }
    }
  });

  it('classifies the probes well when run by onnxruntime-node with a symbolic batch', async () => {
    const session = await ort.InferenceSession.create(MODEL);
    expect(session.inputNames).toEqual(['tile']);
    expect(session.outputNames).toEqual(['attributes']);
    const batch = 300; // not a divisor of the probe count, so the last batch has another size
    const scores = new Float32Array(count * 12);
    for (let start = 0; start < count; start += batch) {
      const n = Math.min(batch, count - start);
      const input = new ort.Tensor('float32', npy.data.slice(start * 432, (start + n) * 432), [n, 3, 12, 12]);
      const out = await session.run({ tile: input });
      expect(out.attributes.dims).toEqual([n, 12]);
      scores.set(out.attributes.data as Float32Array, start * 12);
    }
    await session.release();
    // Output order: the concepts.csv rows (hue, form, place; four each).
    const order = csv('concepts.csv').map((c) => c.label);
    const correct = [0, 0, 0];
    for (const row of csv('labels.csv')) {
      const probe = Number(row.probe);
      const k = order.indexOf(row.label);
      const family = Math.floor(k / 4);
      let best = family * 4;
      for (let j = family * 4; j < family * 4 + 4; j++) if (scores[probe * 12 + j] > scores[probe * 12 + best]) best = j;
      if (best === k) correct[family]++;
    }
    for (const c of correct) expect(c / count).toBeGreaterThan(0.95);
  });
});
