/**
 * `npm run sample-data`: rebuilds sample-data/tiles/ and sample-data/tiles-model.onnx, then prints the checks.
 * Options for experiments: --out DIR --probes N --train N --epochs N (defaults: the committed build).
 */
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { describeLayer, maxDeviationFromOnnxRuntime, unitSelectivity } from './lib/checks';
import { evaluate } from './lib/net';
import { buildTiles, FAMILY_NAMES, FULL_SIZES } from './lib/tiles';

function option(name: string, fallback: number): number;
function option(name: string, fallback: string): string;
function option(name: string, fallback: number | string): number | string {
  const at = process.argv.indexOf(`--${name}`);
  if (at < 0) return fallback;
  const raw = process.argv[at + 1];
  if (typeof fallback === 'string') return raw;
  const value = Number(raw);
  if (!Number.isInteger(value) || value <= 0) throw new Error(`--${name} needs a positive whole number, got "${raw}"`);
  return value;
}

function folderBytes(target: string): number {
  const stat = fs.statSync(target);
  if (!stat.isDirectory()) return stat.size;
  return fs.readdirSync(target).reduce((sum, entry) => sum + folderBytes(path.join(target, entry)), 0);
}

function percent(values: number[]): string {
  return values.map((v, f) => `${FAMILY_NAMES[f]} ${(100 * v).toFixed(1)}%`).join(', ');
}

async function main(): Promise<void> {
  const here = path.dirname(fileURLToPath(import.meta.url));
  const started = Date.now();
  const result = buildTiles({
    outDir: path.resolve(option('out', here)),
    probeCount: option('probes', FULL_SIZES.probeCount),
    trainCount: option('train', FULL_SIZES.trainCount),
    epochs: option('epochs', FULL_SIZES.epochs),
  });
  const built = (Date.now() - started) / 1000;
  console.log(`built ${result.probeDir} (${result.probes.count} probes) and ${result.modelPath} in ${built.toFixed(1)} s`);
  console.log(`loss per epoch: ${result.epochLosses.map((l) => l.toFixed(3)).join(' ')}`);
  console.log(`accuracy, training tiles: ${percent(result.trainAccuracy)}`);
  console.log(`accuracy, probe tiles:    ${percent(result.probeAccuracy)}`);
  const deviation = await maxDeviationFromOnnxRuntime(fs.readFileSync(result.modelPath), result.params, result.probes);
  console.log(`onnxruntime vs TypeScript forward: max |difference| ${deviation.toExponential(2)} (must be < 1e-4)`);
  if (!(deviation < 1e-4)) throw new Error('the exported model does not match the trained network');
  const evaluation = evaluate(result.params, result.probes);
  console.log('labels with AUROC > 0.75 per unit (probe set):');
  for (const line of describeLayer('relu_narrow', unitSelectivity(evaluation.narrow, result.params.shape.narrow, result.probes, 0.75))) console.log(line);
  for (const line of describeLayer('relu_wide', unitSelectivity(evaluation.wide, result.params.shape.wide, result.probes, 0.75))) console.log(line);
  console.log(`sizes: ${result.probeDir} ${(folderBytes(result.probeDir) / 1e6).toFixed(2)} MB, model ${folderBytes(result.modelPath)} bytes`);
}

main().catch((error: unknown) => {
  console.error(error instanceof Error ? error.message : error);
  process.exitCode = 1;
});
