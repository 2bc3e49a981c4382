/**
 * The screens' read-models (core/api/screens/read-models.ts through the API) on the planted model, whose units are polysemantic or not
 * by construction (test/support/fixtures.ts), plus reference checks of the histogram and correlation helpers.
 */
import fs from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, dispatch, runScan } from '../../core/api/index.ts';
import { binOf, pearson } from '../../core/score/stats.ts';
import { sampleChunks } from '../../core/api/screens/read-models.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { readScoreOptions } from '../../core/store/scores.ts';
import { scoreStudy } from '../../core/score/job.ts';
import { PLANTED_UNITS, tempDir, writePlanted } from '../support/fixtures.ts';

const unitOf = (name: string) => PLANTED_UNITS.findIndex((u) => u.name === name);

describe('histogram and correlation helpers', () => {
  it('bins like numpy.histogram: half-open bins, the last one closed', () => {
    // numpy.histogram docs: np.histogram([1, 2, 1], bins=[0, 1, 2, 3]) → counts [0, 2, 1].
    const counts = [0, 0, 0];
    for (const v of [1, 2, 1]) counts[binOf(v, 0, 1, 3)]++;
    expect(counts).toEqual([0, 2, 1]);
    // "All but the last (righthand-most) bin is half-open": 3 falls in [2, 3] (numpy.histogram docs, Notes).
    expect(binOf(3, 0, 1, 3)).toBe(2);
  });

  it("gives Anscombe's quartet its published r = 0.816", () => {
    // Anscombe 1973, "Graphs in statistical analysis", data set I; correlation 0.816 for all four sets.
    const x = new Float32Array([10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5]);
    const y = new Float32Array([8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68]);
    const mean = (a: Float32Array) => a.reduce((s, v) => s + v, 0) / a.length;
    expect(pearson(x, mean(x), y, mean(y), 11)).toBeCloseTo(0.816, 3);
    // A constant sample has no correlation (division by a zero standard deviation).
    expect(pearson(x, mean(x), new Float32Array(11).fill(2), 2, 11)).toBeNaN();
  });

  it('spreads the sampled chunks evenly and never repeats one', () => {
    expect(sampleChunks(10, 4)).toEqual([0, 2, 5, 7]);
    expect(sampleChunks(3, 8)).toEqual([0, 1, 2]);
    expect(sampleChunks(1, 1)).toEqual([0]);
  });
});

describe('screen requests on the planted study', () => {
  let dir: string;
  let study: string;
  const ctx = {};
  const api = createApi(ctx);

  beforeAll(async () => {
    dir = tempDir();
    const { model, probes } = writePlanted(dir);
    study = path.join(dir, 'planted.study');
    // chunkSize 500 → 8 chunks of the 4000 probes, so the correlation sample spans several chunks.
    await runScan({ model, probes, study, batch: 200, layers: ['planted'], chunkSize: 500 });
  });

  it('units.table holds the same units, order and drivers as study.rank, as columns', async () => {
    const t = await api['units.table']({ study });
    const rows = await api['study.rank']({ study });
    expect(t.count).toBe(PLANTED_UNITS.length);
    expect(t.layers.map((l) => l.name)).toEqual(['planted']);
    rows.forEach((r, i) => {
      expect(t.unit[i]).toBe(r.unit);
      expect(t.rank[i]).toBe(i);
      expect(t.conceptCount[i]).toBeCloseTo(r.conceptCount, 4);
      const labels = t.driverLabel.slice(t.driverOffsets[i], t.driverOffsets[i + 1]).map((l) => t.labels[l]);
      expect(labels).toEqual(r.drivers.map((d) => d.label));
      expect(t.flags[i]).toBe((r.flags.includes('dead') ? 1 : 0) | (r.flags.includes('dense') ? 2 : 0));
    });
    // Stored with the other score options; 1.5 is the default (half-way between one and two concepts, core/score/unit.ts).
    expect(t.thresholds.polysemanticAt).toBe(1.5);
    expect(t.thresholds.maxQ).toBe(0.05);
    // Kinds are classified in core and sent: planted by construction (red+orange's count lies between 1 and 2, so either).
    const kindOf = (name: string) => t.kinds[t.kind[t.unit.indexOf(unitOf(name))]];
    expect(['dead', 'dense', 'mono-red', 'mono-star', 'blue+square', 'red+circle+top'].map(kindOf)).toEqual(['dead', 'dense', 'single', 'single', 'mixed', 'mixed']);
    expect(['mixed', 'single']).toContain(kindOf('red+orange'));
  });

  it('unit.distributions counts every probe once overall and once per label', async () => {
    const d = await api['unit.distributions']({ study, layer: 'planted', unit: unitOf('blue+square'), bins: 20 });
    expect(d.edges).toHaveLength(21);
    expect(d.all.reduce((a, b) => a + b, 0) + d.allAtFloor).toBe(4000);
    // blue+square = relu(blue + square + 0.001·noise): probes with neither sit near 0 (construction); the lowest is the floor.
    expect(d.floor).toBeGreaterThanOrEqual(0);
    expect(d.floor).toBeLessThan(0.0015);
    expect(d.allAtFloor).toBeGreaterThanOrEqual(1);
    // Drivers first, as constructed: blue and square.
    expect(new Set(d.labels.slice(0, 2).map((l) => l.label))).toEqual(new Set(['blue', 'square']));
    for (const l of d.labels) expect(l.counts.reduce((a, b) => a + b, 0) + l.atFloor).toBe(l.n);
    // Every blue probe is above the floor (its activation is at least 1 by construction).
    expect(d.labels.find((l) => l.label === 'blue')!.atFloor).toBe(0);
    // Every probe has exactly one hue (fixture construction): the hue labels' n sum to at most N.
    const named = await api['unit.distributions']({ study, layer: 'planted', unit: 0, labels: ['red', 'orange', 'blue', 'green', 'violet', 'grey'] });
    expect(named.labels.reduce((s, l) => s + l.n, 0)).toBe(4000);
    await expect(api['unit.distributions']({ study, layer: 'planted', unit: 0, labels: ['purple'] })).rejects.toMatchObject({ code: 'request', where: 'labels.0' });
  });

  it('unit.similar finds the unit sharing a driver and bounds the sample', async () => {
    const s = await api['unit.similar']({ study, layer: 'planted', unit: unitOf('mono-red') });
    expect(s.sample).toBeLessThanOrEqual(4096);
    expect(s.probes).toBe(4000);
    expect(s.constant).toBe(false);
    // mono-red = relu(red); red+orange and red+circle+top both contain red: they are its nearest kin (construction).
    expect(new Set(s.units.slice(0, 2).map((u) => PLANTED_UNITS[u.unit].name))).toEqual(new Set(['red+orange', 'red+circle+top']));
    expect(s.units.every((u) => u.unit !== unitOf('mono-red'))).toBe(true);
    for (let i = 1; i < s.units.length; i++) expect(s.units[i - 1].r).toBeGreaterThanOrEqual(s.units[i].r);
    const dead = await api['unit.similar']({ study, layer: 'planted', unit: unitOf('dead') });
    expect(dead.constant).toBe(true);
    expect(dead.units).toEqual([]);
  });

  it('concept.units: red drives three units, and is the only driver of one', async () => {
    const r = await api['concept.units']({ study, label: 'red' });
    expect(new Set(r.drivers.map((d) => PLANTED_UNITS[d.unit].name))).toEqual(new Set(['mono-red', 'red+orange', 'red+circle+top']));
    expect(r.driverOf).toBe(3);
    expect(r.onlyDriverOf).toBe(1);
    expect(r.drivers.find((d) => d.onlyDriver)!.unit).toBe(unitOf('mono-red'));
    expect(r.aurocHistogram.reduce((a, b) => a + b, 0)).toBe(PLANTED_UNITS.length);
    expect(r.totalUnits).toBe(PLANTED_UNITS.length);
    await expect(api['concept.units']({ study, label: 'nope' })).rejects.toMatchObject({ code: 'request', where: 'label' });
  });

  it('layers.strata counts the planted kinds', async () => {
    const o = await api['layers.strata']({ study });
    const l = o.layers[0];
    expect(l.units).toBe(7);
    expect(l.dead).toBe(1);
    expect(l.dense).toBe(1);
    // red+circle+top (≈3) and blue+square (≈2) are at or above 1.5; mono units are exactly 1 (construction).
    expect(l.mixed).toBeGreaterThanOrEqual(2);
    expect(l.undriven).toBe(0); // every live planted unit has a driver (construction)
    expect(l.mixed + l.single + l.undriven + l.dead + l.dense).toBe(7);
    expect(l.histogram.reduce((a, b) => a + b, 0)).toBe(7);
  });

  it('probes.labels returns each probe’s labels', async () => {
    const labels = await api['probes.labels']({ study, probes: [0, 1] });
    expect(labels).toHaveLength(2);
    for (const ls of labels) expect(ls).toHaveLength(3); // one hue, one form, one place per probe
  });

  it('example.image reads inside the probe folder and refuses paths that leave it', async () => {
    const probes = path.join(dir, 'planted-probes');
    // A 1×1 PNG (PNG specification: signature 89 50 4E 47 0D 0A 1A 0A).
    const png = Buffer.from('89504e470d0a1a0a0000000d4948445200000001000000010806000000', 'hex');
    fs.writeFileSync(path.join(probes, 'p0.png'), png);
    fs.writeFileSync(path.join(dir, 'outside.png'), png);
    fs.symlinkSync(path.join(dir, 'outside.png'), path.join(probes, 'link.png'));
    const db = new Database(study);
    const set = db.prepare(`INSERT OR REPLACE INTO example (probe, ext_id, text, image) VALUES (?, NULL, NULL, ?)`);
    set.run(0, 'p0.png');
    set.run(1, '../outside.png');
    set.run(2, 'link.png');
    set.run(3, 'notes.txt');
    db.close();
    const ok = await api['example.image']({ study, probe: 0 });
    expect(ok.mime).toBe('image/png');
    expect(ok.dataUrl.startsWith('data:image/png;base64,')).toBe(true);
    expect(Buffer.from(ok.dataUrl.split(',')[1], 'base64').equals(png)).toBe(true);
    await expect(api['example.image']({ study, probe: 1 })).rejects.toMatchObject({ code: 'probes', where: 'probe 1' });
    await expect(api['example.image']({ study, probe: 2 })).rejects.toMatchObject({ code: 'probes', message: expect.stringContaining('outside the probe-set folder') });
    fs.writeFileSync(path.join(probes, 'notes.txt'), 'x');
    await expect(api['example.image']({ study, probe: 3 })).rejects.toMatchObject({ code: 'probes', message: expect.stringContaining('PNG') });
    await expect(api['example.image']({ study, probe: 5 })).rejects.toMatchObject({ code: 'request', where: 'probe' });
  });

  it('example.image in browser mode refuses a probe-set folder stored in the study outside the allowed folders', async () => {
    // Issue 10: the study lies inside the allowed folder, the probe-set path it stores does not.
    const allowed = path.join(dir, 'allowed');
    fs.mkdirSync(allowed, { recursive: true });
    const boxedStudy = path.join(allowed, 'copy.study');
    fs.copyFileSync(study, boxedStudy);
    fs.writeFileSync(path.join(dir, 'planted-probes', 'p0.png'), Buffer.from('89504e470d0a1a0a', 'hex'));
    const db = new Database(boxedStudy);
    db.prepare(`INSERT OR REPLACE INTO example (probe, ext_id, text, image) VALUES (0, NULL, NULL, 'p0.png')`).run();
    db.close();
    const ctx = { allowedRoots: [allowed] };
    await expect(dispatch(createApi(ctx), ctx, 'example.image', { study: boxedStudy, probe: 0 })).rejects.toMatchObject({
      code: 'request', where: 'probe-set folder', message: expect.stringContaining('outside the folders Skein may use'),
    });
    // Outside browser mode (no roots) the same study shows the image.
    expect((await createApi({})['example.image']({ study: boxedStudy, probe: 0 })).mime).toBe('image/png');
  });

  it('classifies with the polysemanticAt the scores were made with, stored among their options', async () => {
    const copy = path.join(dir, 'strict.study');
    fs.copyFileSync(study, copy);
    const db = openStudyDb(copy);
    try {
      // blue+square has two unrelated drivers (concept count ≈ 2, construction): mixed at 1.5, single at 2.5.
      expect(scoreStudy(db, { polysemanticAt: 2.5 }).reused).toBe(false);
      expect(readScoreOptions(db)?.polysemanticAt).toBe(2.5);
    } finally {
      db.close();
    }
    const t = await api['units.table']({ study: copy });
    const kindOf = (name: string) => t.kinds[t.kind[t.unit.indexOf(unitOf(name))]];
    expect(t.thresholds.polysemanticAt).toBe(2.5);
    expect(kindOf('blue+square')).toBe('single');
    expect(kindOf('red+circle+top')).toBe('mixed'); // ≈ 3 concepts
    const strata = await api['layers.strata']({ study: copy });
    expect(strata.polysemanticAt).toBe(2.5);
    expect(strata.layers[0].mixed).toBe(t.kind.filter((k) => t.kinds[k] === 'mixed').length);
  });

  it('validates screen requests at the boundary', async () => {
    await expect(dispatch(api, ctx, 'units.table', {})).rejects.toMatchObject({ code: 'request', where: 'study' });
    await expect(dispatch(api, ctx, 'unit.distributions', { study, layer: 'planted', unit: 0, bins: 1 })).rejects.toMatchObject({ where: 'bins' });
    await expect(dispatch(api, ctx, 'probes.labels', { study, probes: new Array(513).fill(0) })).rejects.toMatchObject({ where: 'probes' });
    await expect(dispatch(api, { allowedRoots: [path.join(dir, 'elsewhere')] }, 'units.table', { study })).rejects.toMatchObject({ where: 'study' });
  });
});
