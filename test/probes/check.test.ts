import path from 'node:path';
import { describe, expect, it } from 'vitest';
import pngjs from 'pngjs';
import { checkAgainstModel, openProbeSet, resolveFillShapes, type ModelInputSpec } from '../../core/probes/index.ts';
import { expectProbesError, f2bits, f4, f8, i4, i8, npyBytes, probeSetDir } from './fixtures.ts';

// A text-model-like probe set: token ids [N, 4] and float features [N, 2]; the model also takes a mask.
function tokenSet(ids: Uint8Array = i8(Array.from({ length: 24 }, (_, i) => BigInt(i))), idsDescr = '<i8', fill: object = { mask: 1 }): string {
  return probeSetDir({
    'manifest.json': { name: 'tokens', inputs: { ids: 'ids.npy', x: 'x.npy' }, labels: 'labels.csv', fill },
    'ids.npy': npyBytes({ descr: idsDescr, shape: [6, 4], data: ids }),
  });
}

const model = (...inputs: ModelInputSpec[]) => inputs;
const ids: ModelInputSpec = { name: 'ids', elemType: 'int64', dims: ['batch', 'sequence'] };
const x: ModelInputSpec = { name: 'x', elemType: 'float32', dims: ['batch', 2] };
const mask: ModelInputSpec = { name: 'mask', elemType: 'int64', dims: ['batch', 'sequence'] };

describe('checkAgainstModel', () => {
  it('accepts a fitting probe set and sizes fills from the dims other inputs fix', () => {
    const set = openProbeSet(tokenSet());
    expect(() => checkAgainstModel(set, model(ids, x, mask))).not.toThrow();
    expect(resolveFillShapes(set, model(ids, x, mask))).toEqual({ mask: [4] });
    expect(() => checkAgainstModel(set, model({ ...ids, dims: null }, { ...x, dims: [1, 2] }, { ...mask, dims: ['batch', 4] }))).not.toThrow();
  });

  it('allows the documented casts: float16/float64/uint8 → float32, int32 → int64', () => {
    for (const data of [
      npyBytes({ descr: '<f8', shape: [6, 2], data: f8(new Array(12).fill(0.5)) }),
      npyBytes({ descr: '<f2', shape: [6, 2], data: f2bits(new Array(12).fill(0x3c00)) }),
      npyBytes({ descr: '|u1', shape: [6, 2], data: new Uint8Array(12) }),
    ]) {
      const set = openProbeSet(probeSetDir({ 'x.npy': data }));
      expect(() => checkAgainstModel(set, model(x))).not.toThrow();
    }
    const set = openProbeSet(tokenSet(i4(new Array(24).fill(3)), '<i4'));
    expect(() => checkAgainstModel(set, model(ids, x, mask))).not.toThrow();
  });

  it('dtype that does not fit: an int64 model input needs an integer array', () => {
    const dir = tokenSet(f4(new Array(24).fill(1)), '<f4');
    expectProbesError(() => checkAgainstModel(openProbeSet(dir), model(ids, x, mask)), {
      file: path.join(dir, 'ids.npy'), where: 'inputs.ids',
      message: /ids\.npy holds float32 values but model input "ids" takes int64; Skein feeds a int64 input from int64, int32, uint8, bool values — re-save it with arr\.astype\(np\.int64\)/,
    });
  });

  it('shape that does not fit names the expected and actual per-probe shape', () => {
    const dir = tokenSet();
    expectProbesError(() => checkAgainstModel(openProbeSet(dir), model(ids, { ...x, dims: ['batch', 3] }, mask)), {
      file: path.join(dir, 'x.npy'), where: 'inputs.x',
      message: /x\.npy gives each probe the shape \[2\] but model input "x" expects \[3\] per probe \(model input shape \[batch, 3\]\); re-save the array with shape \[N, 3\]/,
    });
    expectProbesError(() => checkAgainstModel(openProbeSet(dir), model(ids, { ...x, dims: ['batch', 1, 2] }, mask)), {
      file: path.join(dir, 'x.npy'), where: 'inputs.x', message: /shape \[2\] but model input "x" expects \[1, 2\]/,
    });
  });

  it('a model input the probe set lacks, with no fill, says to add it to manifest fill', () => {
    const dir = tokenSet(undefined, undefined, {});
    expectProbesError(() => checkAgainstModel(openProbeSet(dir), model(ids, x, mask)), {
      file: path.join(dir, 'manifest.json'), where: 'fill',
      message: /Model input "mask" is not in the probe set; add it to manifest\.json "inputs" as an \.npy file, or give it a constant in manifest "fill" \(e\.g\. "fill": \{"mask": 0\}\)/,
    });
  });

  it('fills it cannot build, and names that match no model input', () => {
    const dir = tokenSet();
    const set = openProbeSet(dir);
    const manifestFile = path.join(dir, 'manifest.json');
    expectProbesError(() => checkAgainstModel(set, model(ids, x, { ...mask, dims: ['batch', 'heads'] })), {
      file: manifestFile, where: 'fill.mask', message: /dimension "heads" that no provided input fixes/,
    });
    const badFill = (value: number) => { const d = tokenSet(undefined, undefined, { mask: value }); return { set: openProbeSet(d), file: path.join(d, 'manifest.json') }; };
    const two = badFill(2);
    expectProbesError(() => checkAgainstModel(two.set, model(ids, x, { ...mask, elemType: 'bool' })), { file: two.file, where: 'fill.mask', message: /bool values; its fill must be 0 or 1, not 2/ });
    expectProbesError(() => checkAgainstModel(set, model(ids, x)), { file: manifestFile, where: 'fill.mask', message: /"fill" names "mask" but the model has no input of that name; rename it to one of: "ids", "x"/ });
    expectProbesError(() => checkAgainstModel(set, model(ids, mask)), { file: path.join(dir, 'x.npy'), where: 'inputs.x', message: /gives input "x" but the model has no input of that name/ });
    const half = badFill(0.5);
    expectProbesError(() => checkAgainstModel(half.set, model(ids, x, mask)), { file: half.file, where: 'fill.mask', message: /takes int64 values but its fill is 0\.5; use a whole number/ });
  });

  it('two inputs that give one symbolic dimension different sizes', () => {
    const dir = tokenSet();
    expectProbesError(() => checkAgainstModel(openProbeSet(dir), model(ids, { ...x, dims: ['batch', 'sequence'] }, mask)), {
      file: path.join(dir, 'x.npy'), where: 'inputs.x', message: /dimension "sequence".*2, but input "ids" makes it 4/,
    });
  });

  it('image inputs point at manifest "preprocess"', () => {
    const image = new pngjs.PNG({ width: 1, height: 1 });
    const dir = probeSetDir({
      'manifest.json': { name: 'tiles', labels: 'labels.csv', examples: 'examples.csv', preprocess: { input: 'pixels', size: [8, 8] } },
      'examples.csv': 'probe,image\n0,a.png\n',
      'labels.csv': 'probe,label\n0,tile\n',
      'a.png': pngjs.PNG.sync.write(image),
    });
    const set = openProbeSet(dir);
    expect(() => checkAgainstModel(set, model({ name: 'pixels', elemType: 'float32', dims: ['N', 3, 8, 8] }))).not.toThrow();
    expectProbesError(() => checkAgainstModel(set, model({ name: 'pixels', elemType: 'float32', dims: ['N', 3, 224, 224] })), {
      file: path.join(dir, 'manifest.json'), where: 'preprocess',
      message: /"preprocess" gives each probe the shape \[3, 8, 8\] but model input "pixels" expects \[3, 224, 224\].*set "size", "channels" and "layout"/,
    });
    expectProbesError(() => checkAgainstModel(set, model({ name: 'pixels', elemType: 'uint8', dims: null })), {
      file: path.join(dir, 'manifest.json'), where: 'preprocess', message: /builds float32 values but model input "pixels" takes uint8/,
    });
  });
});
