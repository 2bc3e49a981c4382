/** Studies for the review tests: a real scan of the planted model (with example images), or a bare study file. */
import fs from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import pngjs from 'pngjs';
import { runScan } from '../../core/api/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { bindStudy, insertLayer } from '../../core/store/binding.ts';
import { FORMS, HUES, PLACES, plantedProbes, tempDir, writePlanted } from '../support/fixtures.ts';

const HUE_RGB: Record<string, [number, number, number]> = {
  red: [214, 48, 49], orange: [240, 140, 30], blue: [40, 90, 200], green: [40, 160, 80], violet: [140, 70, 190], grey: [130, 130, 130],
};

/** A 24×24 picture of a probe's labels: its form, in its hue, placed at its place. */
export function probePng(hue: string, form: string, place: string): Buffer {
  const size = 24;
  const png = new pngjs.PNG({ width: size, height: size });
  const [r, g, b] = HUE_RGB[hue];
  const cx = place === 'left' ? 7 : place === 'right' ? 16 : 12;
  const cy = place === 'top' ? 7 : place === 'bottom' ? 16 : 12;
  for (let y = 0; y < size; y++) {
    for (let x = 0; x < size; x++) {
      const dx = x - cx;
      const dy = y - cy;
      const d = Math.hypot(dx, dy);
      const inside = form === 'circle' ? d <= 5
        : form === 'square' ? Math.abs(dx) <= 4 && Math.abs(dy) <= 4
        : form === 'ring' ? d <= 5.5 && d >= 3.2
        : Math.abs(dx) + Math.abs(dy) <= 6 && (Math.abs(dx) <= 1.5 || Math.abs(dy) <= 1.5 || Math.abs(dx) + Math.abs(dy) <= 3);
      const o = (y * size + x) * 4;
      png.data[o] = inside ? r : 246;
      png.data[o + 1] = inside ? g : 244;
      png.data[o + 2] = inside ? b : 238;
      png.data[o + 3] = 255;
    }
  }
  return pngjs.PNG.sync.write(png);
}

/** Adds examples.csv (id + image per probe) to the planted probe set. */
export function addExampleImages(probesDir: string, n: number, seed: number): void {
  const { labels } = plantedProbes(n, seed);
  fs.mkdirSync(path.join(probesDir, 'images'), { recursive: true });
  const lines = ['probe,id,image'];
  labels.forEach((ls, p) => {
    const hue = ls.find((l) => HUES.includes(l))!;
    const form = ls.find((l) => FORMS.includes(l))!;
    const place = ls.find((l) => PLACES.includes(l))!;
    const name = `images/p${String(p).padStart(4, '0')}.png`;
    fs.writeFileSync(path.join(probesDir, name), probePng(hue, form, place));
    lines.push(`${p},tile-${p},${name}`);
  });
  fs.writeFileSync(path.join(probesDir, 'examples.csv'), lines.join('\n') + '\n');
  const manifestFile = path.join(probesDir, 'manifest.json');
  const manifest = JSON.parse(fs.readFileSync(manifestFile, 'utf8'));
  fs.writeFileSync(manifestFile, JSON.stringify({ ...manifest, examples: 'examples.csv' }, null, 1));
}

export interface ScannedStudy { dir: string; model: string; probes: string; study: string }

/** Scans the planted model (4000 probes, with images when asked) into a fresh study. */
export async function scannedStudy(opts: { images?: boolean; n?: number; seed?: number } = {}): Promise<ScannedStudy> {
  const dir = tempDir('skein-review-');
  const n = opts.n ?? 4000;
  const seed = opts.seed ?? 7;
  const { model, probes } = writePlanted(dir, n, seed);
  if (opts.images) addExampleImages(probes, n, seed);
  const study = path.join(dir, 'planted.study');
  await runScan({ model, probes, study, batch: 200, layers: ['planted'] });
  return { dir, model, probes, study };
}

/** A copy of a closed study file (its WAL was checkpointed on close). */
export function copyStudy(from: string, to: string): string {
  fs.copyFileSync(from, to);
  return to;
}

/**
 * A study file with a run and layers but no activations: enough for review, which needs only the fingerprints and
 * the layers' unit counts. Made through the real schema and migrations.
 */
export function bareStudy(file: string, layers: { name: string; units: number }[], fps = { model: 'model-fp-1', probes: 'probes-fp-1' }): string {
  const db = openStudyDb(file, { create: true });
  try {
    bindStudy(db, { path: 'm.onnx', fingerprint: fps.model, json: '{}' },
      { dir: 'probes', fingerprint: fps.probes, name: 'probes', count: 1, labels: [], labelOffsets: new Int32Array(2), labelIds: new Int32Array(0), concepts: null, examples: null, relatedness: null }, 1);
    layers.forEach((l, i) => insertLayer(db, { name: l.name, op: 'Relu', node: `n-${l.name}`, position: i, dims: [l.units], kind: 'dense', units: l.units, pool: 'none' }));
  } finally {
    db.close();
  }
  return file;
}

/** Every review row of a study, in a fixed order: what "nothing was written" is checked against. */
export function reviewDump(study: string): { annotations: unknown[]; events: unknown[] } {
  const db = new Database(study, { readonly: true });
  try {
    return {
      annotations: db.prepare(`SELECT * FROM annotation ORDER BY model_fp, probes_fp, layer, unit`).all(),
      events: db.prepare(`SELECT * FROM annotation_event ORDER BY seq`).all(),
    };
  } finally {
    db.close();
  }
}
