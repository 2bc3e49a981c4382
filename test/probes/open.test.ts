import { createHash } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { openProbeSet } from '../../core/probes/index.ts';
import { expectProbesError, f2bits, f4, f8, npyBytes, probeSetDir, tempDir, writeFiles, numbers } from './fixtures.ts';

const manifest = (extra: object) => ({ name: 'shapes', inputs: { x: 'x.npy' }, labels: 'labels.csv', ...extra });

describe('openProbeSet: a valid folder', () => {
  it('reads labels into sorted names and CSR arrays, inputs lazily, and notes warnings', () => {
    const dir = probeSetDir();
    const set = openProbeSet(dir);
    expect(set).toMatchObject({ dir, name: 'shapes', count: 6, fill: {}, concepts: null, examples: null, relatedness: null });
    expect(set.labels).toEqual(['red', 'round', 'square']);
    // probe 4 has "round" and "red": ids sorted ascending within the probe
    expect(Array.from(set.labelOffsets)).toEqual([0, 1, 2, 3, 4, 6, 7]);
    expect(Array.from(set.labelIds)).toEqual([1, 1, 2, 2, 0, 1, 2]);
    expect(set.inputs).toHaveLength(1);
    expect(set.inputs[0]).toMatchObject({ name: 'x', file: path.join(dir, 'x.npy'), dtype: 'float32', rowShape: [2], origin: 'npy' });
    expect(numbers(set.inputs[0].readRows(4, 2))).toEqual([8, 9, 10, 11]);
    // every label here is on fewer than 5 probes (threshold FEW_PROBES_PER_LABEL)
    expect(set.warnings.join('\n')).toMatch(/3 labels occur on fewer than 5 probes/);
  });

  it('counts probes without labels and reads concepts, examples and relatedness', () => {
    const dir = probeSetDir({
      'manifest.json': manifest({ concepts: 'concepts.csv', examples: 'examples.csv', relatedness: 'rel.csv', fill: { mask: 1 } }),
      'labels.csv': 'probe,label\n0,round\n1,"round"\n2,square\n',
      'concepts.csv': 'label,group,description\nround,shape,curved outline\nsquare,shape,\nstriped,texture,\n',
      'examples.csv': 'probe,id,text,image\n1,b,a ring,img/b.png\n0,a,"a disc, filled",\n',
      'img/b.png': 'not decoded without preprocess',
      'rel.csv': 'label_a,label_b,similarity\nround,square,0.25\n',
    });
    const set = openProbeSet(dir);
    expect(set.fill).toEqual({ mask: 1 });
    expect(set.warnings).toContain('3 of 6 probes have no label in labels.csv');
    expect(set.warnings.join('\n')).toMatch(/concepts\.csv lists 1 label that no probe has \("striped"\)/);
    expect(set.concepts).toEqual([
      { label: 'round', group: 'shape', description: 'curved outline' },
      { label: 'square', group: 'shape' },
      { label: 'striped', group: 'texture' },
    ]);
    expect(set.examples).toEqual([
      { probe: 0, id: 'a', text: 'a disc, filled' },
      { probe: 1, id: 'b', text: 'a ring', image: 'img/b.png' },
    ]);
    expect(set.relatedness).toEqual([{ a: 'round', b: 'square', similarity: 0.25 }]);
  });

  it('fingerprints the canonical listing: manifest, inputs by name, CSVs, images; each as name\\nlength\\nbytes', () => {
    const dir = probeSetDir({
      'manifest.json': manifest({ inputs: { y: 'y.npy', x: 'x.npy' }, examples: 'examples.csv' }),
      'y.npy': npyBytes({ descr: '<f8', shape: [6], data: f8([1, 2, 3, 4, 5, 6]) }),
      'examples.csv': 'probe,image\n0,pics/0.png\n',
      'pics/0.png': 'pixels',
    });
    const hash = createHash('sha256');
    for (const name of ['manifest.json', 'x.npy', 'y.npy', 'labels.csv', 'examples.csv', 'pics/0.png']) {
      const bytes = fs.readFileSync(path.join(dir, name));
      hash.update(`${name}\n${bytes.length}\n`).update(bytes);
    }
    const set = openProbeSet(dir);
    expect(set.fingerprint).toBe(hash.digest('hex'));
    expect(openProbeSet(dir).fingerprint).toBe(set.fingerprint);
    fs.writeFileSync(path.join(dir, 'pics/0.png'), 'pixelz');
    expect(openProbeSet(dir).fingerprint).not.toBe(set.fingerprint);
  });

  it('gives the first line of a record whose quoted cell spans lines', () => {
    // A quoted cell may hold a line break (RFC 4180, section 2.6); later records keep their own line numbers.
    const dir = probeSetDir({
      'manifest.json': manifest({ concepts: 'concepts.csv' }),
      'concepts.csv': 'label,group,description\nround,shape,"two\nline description"\n\nflat,shape,flat\r\nround,shape,again\n',
    });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'concepts.csv'), where: 'line 6', message: /"round" is listed twice \(lines 2 and 6\)/ });
    // A label itself may not span lines: the error names the record's first line and the character.
    const label = probeSetDir({ 'labels.csv': 'probe,label\n0,"two\nline label"\n\n1,round\r\n1,round\n' });
    expectProbesError(() => openProbeSet(label), { file: path.join(label, 'labels.csv'), where: 'line 2', message: /control character U\+000A at position 4/ });
  });
});

describe('openProbeSet: each validation error names the file, the place and the fix', () => {
  it('unknown probe index: too large, negative, not an integer', () => {
    for (const [cell, message] of [['6', /probe 6 does not exist; the probe set has 6 probes \(0 to 5\)/], ['-1', /probe "-1" is not a probe index/], ['1.5', /probe "1\.5" is not a probe index/]] as const) {
      const dir = probeSetDir({ 'labels.csv': `probe,label\n0,round\n${cell},round\n` });
      expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'labels.csv'), where: 'line 3', message });
    }
  });

  it('duplicate (probe, label) rows with both line numbers', () => {
    const dir = probeSetDir({ 'labels.csv': 'probe,label\n3,round\n0,red\n3,round\n' });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'labels.csv'), where: 'line 4', message: /probe 3 has label "round" twice \(lines 2 and 4\)/ });
  });

  it('empty label, missing header column, no labels at all', () => {
    const empty = probeSetDir({ 'labels.csv': 'probe,label\n0,round\n1,  \n' });
    expectProbesError(() => openProbeSet(empty), { file: path.join(empty, 'labels.csv'), where: 'line 3', message: /the label is empty/ });
    const header = probeSetDir({ 'labels.csv': 'probe,name\n0,round\n' });
    expectProbesError(() => openProbeSet(header), { file: path.join(header, 'labels.csv'), where: 'header', message: /no "label" column.*found: probe,name/ });
    const none = probeSetDir({ 'labels.csv': 'probe,label\n' });
    expectProbesError(() => openProbeSet(none), { file: path.join(none, 'labels.csv'), where: undefined, message: /has no labels/ });
  });

  it('a label with a control character or of a megabyte is refused, and the message stays one short line', () => {
    // Control characters: Unicode's Cc category is U+0000–U+001F and U+007F–U+009F (Unicode Standard, section 23.1).
    const nul = probeSetDir({ 'labels.csv': 'probe,label\n0,round\n1,ro\u0000und\n' });
    expectProbesError(() => openProbeSet(nul), { file: path.join(nul, 'labels.csv'), where: 'line 3', message: /label "ro\u2426und" contains the control character U\+0000 at position 3/ });
    const c1 = probeSetDir({ 'labels.csv': 'probe,label\n0,\u0085next\n' });
    expectProbesError(() => openProbeSet(c1), { file: path.join(c1, 'labels.csv'), where: 'line 2', message: /control character U\+0085 at position 1/ });
    const huge = 'x'.repeat(1 << 20);
    const big = probeSetDir({ 'labels.csv': `probe,label\n0,round\n1,${huge}\n` });
    let message = '';
    try { openProbeSet(big); } catch (e) { message = (e as Error).message; }
    expect(message).toMatch(/label "x{57}… \(1048576 characters\)" is longer than 200 characters/);
    expect(message.length).toBeLessThan(400);
    // 200 characters is still a label.
    const edge = probeSetDir({ 'labels.csv': `probe,label\n0,${'y'.repeat(200)}\n` });
    expect(openProbeSet(edge).labels).toEqual(['y'.repeat(200)]);
  });

  it('invalid UTF-8 with its byte offset and line', () => {
    // 0xC3 0x28: a 2-byte lead followed by a non-continuation byte (RFC 3629 section 3; invalid)
    const bytes = Buffer.concat([Buffer.from('probe,label\n0,round\n1,caf'), Buffer.from([0xc3, 0x28]), Buffer.from('\n')]);
    const dir = probeSetDir({ 'labels.csv': bytes });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'labels.csv'), where: 'line 3', message: /not valid UTF-8 \(first bad byte at offset 25, line 3\)/ });
  });

  it('N mismatch between inputs names both files and both counts', () => {
    const dir = probeSetDir({
      'manifest.json': manifest({ inputs: { x: 'x.npy', y: 'y.npy' } }),
      'y.npy': npyBytes({ descr: '<f4', shape: [5], data: f4([1, 2, 3, 4, 5]) }),
    });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'y.npy'), where: 'inputs.y', message: /y\.npy \(inputs\.y\) has 5 probes but x\.npy \(inputs\.x\) has 6/ });
  });

  it('NaN / Inf with the first probe holding one, in float32, big-endian float64 and float16', () => {
    const nan = probeSetDir({ 'x.npy': npyBytes({ descr: '<f4', shape: [6, 2], data: f4([0, 1, 2, 3, 4, 5, NaN, 7, 8, Infinity, 10, 11]) }) });
    expectProbesError(() => openProbeSet(nan), { file: path.join(nan, 'x.npy'), where: 'probe 3', message: /a NaN at probe 3 \(element 0 of that probe\).*np\.nan_to_num/ });
    const inf = probeSetDir({ 'x.npy': npyBytes({ descr: '>f8', shape: [6], data: f8([0, 1, 2, 3, -Infinity, 5], true) }) });
    expectProbesError(() => openProbeSet(inf), { file: path.join(inf, 'x.npy'), where: 'probe 4', message: /an infinite value at probe 4/ });
    // binary16 0x7C00 = +Inf (IEEE 754-2008)
    const half = probeSetDir({ 'x.npy': npyBytes({ descr: '<f2', shape: [6], data: f2bits([0, 0x3c00, 0x7c00, 0, 0, 0]) }) });
    expectProbesError(() => openProbeSet(half), { file: path.join(half, 'x.npy'), where: 'probe 2', message: /infinite value at probe 2/ });
  });

  it('finds a NaN past the first 4 MiB read chunk at the right probe', () => {
    const rows = 1_200_000; // 4.8 MB of float32: the scan reads it in several chunks
    const data = new Float32Array(rows);
    data[1_100_003] = NaN;
    const dir = probeSetDir({
      'x.npy': npyBytes({ descr: '<f4', shape: [rows], data: new Uint8Array(data.buffer) }),
      'labels.csv': 'probe,label\n0,round\n',
    });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'x.npy'), where: 'probe 1100003', message: /NaN at probe 1100003/ });
  });

  it('Fortran-order inputs', () => {
    const dir = probeSetDir({ 'x.npy': npyBytes({ descr: '<f4', shape: [6, 2], fortran: true, data: f4(new Array(12).fill(0)) }) });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'x.npy'), where: 'header.fortran_order', message: /np\.ascontiguousarray/ });
  });

  it('paths that escape the folder: "..", absolute, a symlink pointing outside', () => {
    const outside = tempDir();
    writeFiles(outside, { 'secret.png': 'x', 'labels.csv': 'probe,label\n0,a\n' });
    for (const image of [`../${path.basename(outside)}/secret.png`, path.join(outside, 'secret.png'), 'link.png']) {
      const dir = probeSetDir({ 'manifest.json': manifest({ examples: 'examples.csv' }), 'examples.csv': `probe,image\n0,ok.png\n1,${image}\n`, 'ok.png': 'x' });
      fs.symlinkSync(path.join(outside, 'secret.png'), path.join(dir, 'link.png'));
      // both folders sit in the temp dir, so "../<outside>/secret.png" names a real file outside the probe set
      expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'examples.csv'), where: 'line 3', message: /escapes the probe-set folder/ });
    }
    const viaManifest = probeSetDir({ 'manifest.json': manifest({ labels: path.join(outside, 'labels.csv') }) });
    expectProbesError(() => openProbeSet(viaManifest), { file: path.join(viaManifest, 'manifest.json'), where: 'labels', message: /labels file ".*" escapes the probe-set folder/ });
  });

  it('"labels": "." says it names the folder itself, not that it escapes (issue 10)', () => {
    for (const labels of ['.', './', 'sub/..']) {
      const dir = probeSetDir({ 'manifest.json': manifest({ labels }) });
      expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'manifest.json'), where: 'labels', message: /is the probe-set folder itself, not a file/ });
    }
  });

  it('a missing image file, with its line', () => {
    const dir = probeSetDir({ 'manifest.json': manifest({ examples: 'examples.csv' }), 'examples.csv': 'probe,text,image\n0,a,\n2,b,img/2.png\n' });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'examples.csv'), where: 'line 3', message: /image "img\/2\.png" was not found/ });
  });

  it('concepts: a label listed twice is an error with both lines', () => {
    const dir = probeSetDir({ 'manifest.json': manifest({ concepts: 'concepts.csv' }), 'concepts.csv': 'label,group\nround,shape\nred,colour\nround,outline\n' });
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'concepts.csv'), where: 'line 4', message: /"round" is listed twice \(lines 2 and 4\)/ });
  });

  it('relatedness: similarity outside [0, 1] and a pair given twice in either order', () => {
    const range = probeSetDir({ 'manifest.json': manifest({ relatedness: 'rel.csv' }), 'rel.csv': 'label_a,label_b,similarity\nround,red,1.5\n' });
    expectProbesError(() => openProbeSet(range), { file: path.join(range, 'rel.csv'), where: 'line 2', message: /not a number from 0 to 1/ });
    const twice = probeSetDir({ 'manifest.json': manifest({ relatedness: 'rel.csv' }), 'rel.csv': 'label_a,label_b,similarity\nround,red,0.5\nred,round,0.5\n' });
    expectProbesError(() => openProbeSet(twice), { file: path.join(twice, 'rel.csv'), where: 'line 3', message: /given twice \(lines 2 and 3\)/ });
  });

  it('malformed manifest: wrong field type, unknown field, unknown input file, invalid JSON, no inputs', () => {
    const check = (manifestJson: string | object, where: string | undefined, message: RegExp) => {
      const dir = probeSetDir({ 'manifest.json': typeof manifestJson === 'string' ? manifestJson : manifestJson });
      expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'manifest.json'), where, message });
    };
    check(manifest({ name: 3 }), 'name', /field "name" is invalid \(.*expected string.*\)/);
    check(manifest({ inputs: { x: 5 } }), 'inputs.x', /field "inputs\.x" is invalid.*maps each model input name to an \.npy file/);
    check(manifest({ fill: { mask: 'one' } }), 'fill.mask', /field "fill\.mask" is invalid/);
    check(manifest({ labls: 'labels.csv' }), 'labls', /unknown field "labls"/);
    check(manifest({ inputs: { x: 'nope.npy' } }), 'inputs.x', /input file for "x" "nope\.npy" was not found/);
    check('{"name": "shapes",\n "inputs": {"x": "x.npy"}\n "labels": "labels.csv"}', 'line 3', /not valid JSON/);
    check(manifest({ inputs: {} }), 'inputs', /gives no inputs/);
    check(manifest({ fill: { x: 0 } }), 'fill.x', /both in "inputs" and in "fill"/);
  });

  it('a folder that is missing or has no manifest', () => {
    const dir = tempDir();
    expectProbesError(() => openProbeSet(dir), { file: path.join(dir, 'manifest.json'), where: undefined, message: /no readable manifest\.json/ });
    expectProbesError(() => openProbeSet(path.join(dir, 'nope')), { file: path.join(dir, 'nope'), where: undefined, message: /folder was not found/ });
  });
});
