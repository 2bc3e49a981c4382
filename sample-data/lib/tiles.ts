/** Builds the "tiles" demo: the probe-set folder and the trained ONNX classifier, byte-identical on every run. */
import fs from 'node:fs';
import path from 'node:path';
import { writeFileDurably } from '../../core/fs/index.ts';
import { encodeCsv, encodeNpyFloat32, encodeTilePng } from './files';
import { calibrateBiases, evaluate, initParams, roundedToFloat32, train, type NetParams, type NetShape, type TrainOptions } from './net';
import { encodeTilesModel, MODEL_INPUT } from './onnx-export';
import { CONCEPTS, FAMILIES, FAMILY_COUNT, TILE_CHANNELS, TILE_SIZE, TILE_VALUES, conceptIndex, generateTiles, type TileSet } from './scene';

export const PROBE_SET_FOLDER = 'tiles';
export const MODEL_FILE = 'tiles-model.onnx';
const PREVIEW_SCALE = 4;

/** Seeds: the training tiles and the probe tiles come from different streams, so probes are unseen. */
export const SEEDS = { train: 101, probes: 202, init: 11 } as const;

export const NET_SHAPE: NetShape = { convChannels: 8, narrow: 5, wide: 32 };

/** What `npm run sample-data` builds (the committed files). */
export const FULL_SIZES = { probeCount: 1200, trainCount: 4000, epochs: 15 } as const;

export interface BuildOptions {
  /** Folder that receives tiles/ and tiles-model.onnx (created if missing). */
  outDir: string;
  probeCount: number;
  trainCount: number;
  epochs: number;
}

export interface BuildResult {
  probeDir: string;
  modelPath: string;
  probes: TileSet;
  /** Parameters exactly as stored in the ONNX file (float32-rounded). */
  params: NetParams;
  epochLosses: number[];
  trainAccuracy: number[];
  probeAccuracy: number[];
}

function trainOptions(epochs: number): TrainOptions {
  return {
    epochs,
    batchSize: 32,
    learningRate: 0.1,
    momentum: 0.9,
    wideSparsity: 0.01,
    reviveOn: 256,
    seed: SEEDS.init + 1,
  };
}

function imageName(probe: number): string {
  return `images/${String(probe).padStart(6, '0')}.png`;
}

/** Every file of the probe-set folder, as relative path → bytes, in a fixed order. */
export function probeSetFiles(set: TileSet): Map<string, Uint8Array | string> {
  const files = new Map<string, Uint8Array | string>();
  const manifest = {
    name: 'tiles',
    inputs: { [MODEL_INPUT]: 'tile.npy' },
    labels: 'labels.csv',
    concepts: 'concepts.csv',
    examples: 'examples.csv',
  };
  files.set('manifest.json', JSON.stringify(manifest, null, 2) + '\n');
  files.set('tile.npy', encodeNpyFloat32([set.count, TILE_CHANNELS, TILE_SIZE, TILE_SIZE], set.tiles));
  const labelRows: (string | number)[][] = [];
  for (let i = 0; i < set.count; i++) {
    for (let f = 0; f < FAMILY_COUNT; f++) labelRows.push([i, CONCEPTS[conceptIndex(set, i, f)].label]);
  }
  files.set('labels.csv', encodeCsv(['probe', 'label'], labelRows));
  // What the classifier should answer: its output rows follow concepts.csv, so each label is a class index.
  const targetRows: (string | number)[][] = [];
  for (let i = 0; i < set.count; i++) {
    for (let f = 0; f < FAMILY_COUNT; f++) targetRows.push([i, 'attributes', conceptIndex(set, i, f)]);
  }
  files.set('targets.csv', encodeCsv(['probe', 'output', 'value'], targetRows));
  files.set(
    'concepts.csv',
    encodeCsv(['label', 'group', 'parent', 'description'], CONCEPTS.map((c) => [c.label, c.group, c.parent, c.description])),
  );
  const exampleRows: (string | number)[][] = [];
  for (let i = 0; i < set.count; i++) exampleRows.push([i, `tile-${String(i).padStart(6, '0')}`, imageName(i)]);
  files.set('examples.csv', encodeCsv(['probe', 'id', 'image'], exampleRows));
  for (let i = 0; i < set.count; i++) {
    const tile = set.tiles.subarray(i * TILE_VALUES, (i + 1) * TILE_VALUES);
    files.set(imageName(i), encodeTilePng(tile, TILE_SIZE, TILE_SIZE, PREVIEW_SCALE));
  }
  return files;
}

/** The probe set as committed: `count` tiles from the probe seed. */
export function generateProbes(count: number): TileSet {
  return generateTiles(SEEDS.probes, count);
}

/**
 * Writes the folder beside its final place, then swaps it in, so an interrupted build never leaves a
 * half-written probe set where the old one was.
 */
function writeFolder(dir: string, files: Map<string, Uint8Array | string>): void {
  const staging = `${dir}.partial`;
  fs.rmSync(staging, { recursive: true, force: true });
  for (const [relative, bytes] of files) {
    const target = path.join(staging, relative);
    fs.mkdirSync(path.dirname(target), { recursive: true });
    fs.writeFileSync(target, bytes);
  }
  fs.rmSync(dir, { recursive: true, force: true });
  fs.renameSync(staging, dir);
}


export function trainTilesModel(trainCount: number, epochs: number): { params: NetParams; epochLosses: number[]; trainSet: TileSet } {
  const trainSet = generateTiles(SEEDS.train, trainCount);
  const params = initParams(NET_SHAPE, SEEDS.init);
  calibrateBiases(params, trainSet, 256);
  const epochLosses = train(params, trainSet, trainOptions(epochs));
  return { params: roundedToFloat32(params), epochLosses, trainSet };
}

export function buildTiles(opts: BuildOptions): BuildResult {
  const probes = generateProbes(opts.probeCount);
  const { params, epochLosses, trainSet } = trainTilesModel(opts.trainCount, opts.epochs);
  fs.mkdirSync(opts.outDir, { recursive: true });
  const probeDir = path.join(opts.outDir, PROBE_SET_FOLDER);
  const modelPath = path.join(opts.outDir, MODEL_FILE);
  writeFolder(probeDir, probeSetFiles(probes));
  writeFileDurably(modelPath, encodeTilesModel(params));
  return {
    probeDir,
    modelPath,
    probes,
    params,
    epochLosses,
    trainAccuracy: evaluate(params, trainSet).familyAccuracy,
    probeAccuracy: evaluate(params, probes).familyAccuracy,
  };
}

export const FAMILY_NAMES = FAMILIES.map((f) => f.name);
