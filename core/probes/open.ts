/** openProbeSet: read and check a probe-set folder; input arrays stay on disk and are read on demand. */
import fs from 'node:fs';
import path from 'node:path';
import { readCsvTable, type CsvTable } from './csv.ts';
import { probesError } from './fail.ts';
import { FingerprintBuilder } from './fingerprint.ts';
import { createImageInput, imageFormat, resolvePreprocess } from './images.ts';
import { readManifest } from './manifest.ts';
import { openNpy, type NpyFile } from './npy.ts';
import { resolveInside, type FolderRoot, type ResolvedFile } from './paths.ts';
import {
  buildConcepts, buildExamples, buildLabels, buildRelatedness,
  CONCEPT_COLUMNS, EXAMPLE_COLUMNS, LABEL_COLUMNS, RELATEDNESS_COLUMNS, type ExampleTable,
} from './tables.ts';
import type { InputSource, ProbeSet } from './types.ts';

interface NpyInput {
  name: string;
  where: string;
  resolved: ResolvedFile;
  npy: NpyFile;
}

function openRoot(dir: string): FolderRoot {
  const abs = path.resolve(dir);
  let stat: fs.Stats;
  try {
    stat = fs.statSync(abs);
  } catch {
    throw probesError(abs, undefined, 'The probe-set folder was not found; choose a folder that contains a manifest.json');
  }
  if (!stat.isDirectory()) throw probesError(abs, undefined, 'This is a file, not a folder; a probe set is a folder that contains a manifest.json');
  return { dir: abs, real: fs.realpathSync(abs) };
}

/**
 * Open and validate the probe set in `dir` (synchronous). Every problem a user can cause is a SkeinError with
 * code 'probes', the absolute file and the line/field at fault. The fingerprint pass streams every referenced file.
 */
export function openProbeSet(dir: string): ProbeSet {
  const root = openRoot(dir);
  const manifestFile = path.join(root.dir, 'manifest.json');
  const { manifest, bytes: manifestBytes } = readManifest(manifestFile);
  const warnings: string[] = [];
  const named = (rel: string, where: string, what: string) => resolveInside(root, rel, { file: manifestFile, where }, what);

  // Inputs: .npy headers only; all share the probe axis.
  const npyInputs: NpyInput[] = Object.entries(manifest.inputs).map(([name, rel]) => {
    const where = `inputs.${name}`;
    const resolved = named(rel, where, `input file for "${name}"`);
    return { name, where, resolved, npy: openNpy(resolved.file) };
  });
  for (const input of npyInputs) {
    if (input.name in manifest.fill) {
      throw probesError(manifestFile, `fill.${input.name}`, `"${input.name}" is both in "inputs" and in "fill"; keep it in one of them`);
    }
  }
  const pre = manifest.preprocess ? resolvePreprocess(manifest.preprocess, manifestFile) : null;
  if (pre && (pre.input in manifest.inputs || pre.input in manifest.fill)) {
    throw probesError(manifestFile, 'preprocess.input',
      `"${pre.input}" is built from images by "preprocess" and also given in "${pre.input in manifest.inputs ? 'inputs' : 'fill'}"; keep it in one place`);
  }
  if (npyInputs.length === 0 && !pre) {
    throw probesError(manifestFile, 'inputs',
      'manifest.json gives no inputs; map each model input name to an .npy file in "inputs", or describe image inputs in "preprocess"');
  }
  let count: number | null = null;
  for (const input of npyInputs) {
    if (count === null) count = input.npy.count;
    else if (input.npy.count !== count) {
      const first = npyInputs[0];
      throw probesError(input.resolved.file, input.where,
        `${path.basename(input.resolved.file)} (${input.where}) has ${input.npy.count} probes but ${path.basename(first.resolved.file)} (${first.where}) has ${count}; every input must have the same first axis (one row per probe)`);
    }
  }

  // Examples: with "preprocess" and no .npy, they also define N (one image per probe 0..N-1).
  let examples: ExampleTable | null = null;
  let examplesTable: CsvTable | null = null;
  if (manifest.examples !== undefined) {
    examplesTable = readCsvTable(named(manifest.examples, 'examples', 'examples file').file, EXAMPLE_COLUMNS, warnings);
    examples = buildExamples(examplesTable, count, root);
  }
  let imageInput: InputSource | null = null;
  if (pre) {
    if (!examples || !examplesTable) {
      throw probesError(manifestFile, 'preprocess', '"preprocess" builds inputs from images, so the manifest needs "examples" naming a CSV with columns probe,image');
    }
    if (!examplesTable.columns.includes('image')) {
      throw probesError(examplesTable.file, 'header', `${path.basename(examplesTable.file)} needs an "image" column for "preprocess" (found: ${examplesTable.columns.join(',')})`);
    }
    count ??= examples.examples.length;
    const imageFiles: string[] = [];
    for (let probe = 0; probe < count; probe++) {
      const row = examples.examples[probe];
      if (row === undefined || row.probe !== probe) {
        throw probesError(examplesTable.file, undefined,
          `${path.basename(examplesTable.file)} has no row for probe ${probe}; "preprocess" needs one image for every probe 0 to ${count - 1}`);
      }
      const image = examples.imageFiles[probe];
      if (!image) {
        throw probesError(examplesTable.file, `line ${examples.lines[probe]}`, `probe ${probe} has no image; "preprocess" needs one image for every probe`);
      }
      imageFiles.push(image.file);
    }
    imageInput = createImageInput(pre, examplesTable.file, imageFiles);
  }
  if (count === null) throw new Error('unreachable: a probe count comes from .npy inputs or from images');
  if (count === 0) {
    throw probesError(npyInputs[0]?.resolved.file ?? manifestFile, npyInputs[0]?.where ?? 'examples', 'The probe set has no probes (the first axis is 0); add at least one probe');
  }

  const labelsTable = readCsvTable(named(manifest.labels, 'labels', 'labels file').file, LABEL_COLUMNS, warnings);
  const labels = buildLabels(labelsTable, count, warnings);
  const conceptsTable = manifest.concepts === undefined ? null : readCsvTable(named(manifest.concepts, 'concepts', 'concepts file').file, CONCEPT_COLUMNS, warnings);
  const concepts = conceptsTable ? buildConcepts(conceptsTable, labels.labels, warnings) : null;
  const relatednessTable = manifest.relatedness === undefined ? null : readCsvTable(named(manifest.relatedness, 'relatedness', 'relatedness file').file, RELATEDNESS_COLUMNS, warnings);
  const relatedness = relatednessTable ? buildRelatedness(relatednessTable, labels.labels, warnings) : null;

  // Fingerprint, in a fixed order: manifest, inputs by name, labels, concepts, examples, relatedness, images by probe.
  const fp = new FingerprintBuilder();
  fp.addBytes('manifest.json', manifestBytes);
  for (const input of [...npyInputs].sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0))) {
    fp.addFile(input.resolved.canonical, input.resolved.file, { npy: input.npy, where: input.where });
  }
  const canonical = (table: CsvTable) => path.relative(root.dir, table.file).split(path.sep).join('/');
  for (const table of [labelsTable, conceptsTable, examplesTable, relatednessTable]) {
    if (table) fp.addBytes(canonical(table), table.bytes);
  }
  if (examples && examplesTable) {
    const hashed = new Set<string>();
    examples.imageFiles.forEach((image, i) => {
      if (!image || hashed.has(image.canonical)) return;
      hashed.add(image.canonical);
      const sniff = pre
        ? (head: Uint8Array) => {
          if (!imageFormat(head)) {
            throw probesError(examplesTable.file, `line ${examples.lines[i]}`,
              `image "${examples.examples[i].image}" is neither PNG nor JPEG, which "preprocess" needs; convert it to PNG or JPEG`);
          }
        }
        : undefined;
      fp.addFile(image.canonical, image.file, { onFirstChunk: sniff });
    });
  }

  const inputs: InputSource[] = npyInputs.map(({ name, resolved, npy }) => ({
    name,
    file: resolved.file,
    dtype: npy.dtype,
    rowShape: npy.rowShape,
    origin: 'npy' as const,
    readRows: npy.readRows,
  }));
  if (imageInput) inputs.push(imageInput);

  return {
    dir: root.dir,
    name: manifest.name,
    fingerprint: fp.digest(),
    count,
    inputs,
    fill: { ...manifest.fill },
    labels: labels.labels,
    labelOffsets: labels.labelOffsets,
    labelIds: labels.labelIds,
    concepts,
    examples: examples ? examples.examples : null,
    relatedness,
    warnings,
  };
}
