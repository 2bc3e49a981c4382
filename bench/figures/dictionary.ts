/**
 * Dictionary training (core/dictionary) against the machine's matrix-multiply limit, measured side by side:
 * - limit: one plain onnxruntime MatMul of the encoder's shapes ([batch × units] · [units × features]) over every
 *   probe of an epoch — the one dense product a TopK step cannot avoid;
 * - the encoder product two ways on one batch: the plain typed-array loop and onnxruntime's Gemm (encoder.ts);
 * - a training epoch end to end (trainDictionary, the onnxruntime encoder), its ratio to the limit, and peak RSS.
 */
import * as ort from 'onnxruntime-node';
import { buildModel } from '../../core/model/writer.ts';
import { gaussian, mulberry32 } from '../../core/random.ts';
import { createOrtEncoder, loopEncoder } from '../../core/dictionary/encoder.ts';
import { trainDictionary, type ChunkSource } from '../../core/dictionary/train.ts';
import { median, timed } from '../lib/measure.ts';

export interface DictionarySizes { units: number; probes: number; epochs: number; batch: number; reps: number }

export interface DictionaryFigure {
  sizes: DictionarySizes; features: number;
  gemmEpochSeconds: number; trainEpochSeconds: number; ratio: number;
  loopBatchSeconds: number; ortBatchSeconds: number; gflops: number; peakRssMiB: number;
}

function matmulGraph(): Uint8Array {
  return buildModel({
    name: 'bench-matmul',
    inputs: [{ name: 'X', elemType: 'float32', dims: ['n', 'd'] }, { name: 'W', elemType: 'float32', dims: ['d', 'm'] }],
    outputs: [{ name: 'Z', elemType: 'float32', dims: ['n', 'm'] }],
    initializers: [],
    nodes: [{ op: 'MatMul', inputs: ['X', 'W'], outputs: ['Z'] }],
  });
}

/** Sparse non-negative mixtures of random directions (the shape of a ReLU layer's activations), one chunk at a time. */
function syntheticSource(units: number, probes: number, chunk: number): ChunkSource {
  const rng = mulberry32(17);
  const atoms = 4 * units;
  const dirs = Float32Array.from({ length: atoms * units }, () => gaussian(rng) / Math.sqrt(units));
  const data = new Float32Array(probes * units);
  for (let n = 0; n < probes; n++) for (let t = 0; t < 20; t++) {
    const a = Math.floor(rng() * atoms), w = rng();
    for (let i = 0; i < units; i++) data[n * units + i] += w * dirs[a * units + i];
  }
  return { probes, units, chunks: Math.ceil(probes / chunk), readChunk: (c) => data.subarray(c * chunk * units, Math.min(probes, (c + 1) * chunk) * units) };
}

export async function dictionaryFigure(sizes: DictionarySizes, log: (s: string) => void): Promise<DictionaryFigure> {
  const { units: d, probes, batch } = sizes;
  const m = 4 * d;
  const rng = mulberry32(3);
  const x = Float32Array.from({ length: batch * d }, () => gaussian(rng));
  const w = Float32Array.from({ length: m * d }, () => gaussian(rng));
  const wt = new Float32Array(d * m);
  for (let j = 0; j < m; j++) for (let i = 0; i < d; i++) wt[i * m + j] = w[j * d + i];
  const b = new Float32Array(m);
  const session = await ort.InferenceSession.create(matmulGraph(), { graphOptimizationLevel: 'all' });
  const steps = Math.ceil(probes / batch);
  const gemmRuns: number[] = [];
  for (let r = 0; r < sizes.reps; r++) {
    gemmRuns.push((await timed(async () => {
      for (let s = 0; s < steps; s++) await session.run({ X: new ort.Tensor('float32', x, [batch, d]), W: new ort.Tensor('float32', wt, [d, m]) });
    })).seconds);
  }
  await session.release();
  const gemmEpochSeconds = median(gemmRuns);
  const ortEncoder = await createOrtEncoder();
  const ortRuns: number[] = [];
  for (let r = 0; r < 3; r++) ortRuns.push((await timed(() => ortEncoder.preacts(x, batch, d, w, b, m))).seconds);
  const ortBatchSeconds = median(ortRuns);
  const loopBatchSeconds = (await timed(() => loopEncoder.preacts(x, batch, d, w, b, m))).seconds;
  log(`encoder product, one batch of ${batch}: loop ${(loopBatchSeconds * 1000).toFixed(1)} ms, onnxruntime Gemm ${(ortBatchSeconds * 1000).toFixed(1)} ms (${(loopBatchSeconds / ortBatchSeconds).toFixed(1)}× faster)`);
  const src = syntheticSource(d, probes, 1024);
  const train = await timed(() => trainDictionary(src, { epochs: sizes.epochs, batch, k: 32 }, ortEncoder));
  await ortEncoder.release();
  const trainEpochSeconds = train.seconds / sizes.epochs;
  const gflops = (2 * probes * d * m) / gemmEpochSeconds / 1e9;
  const peakRssMiB = process.resourceUsage().maxRSS / 1024;
  log(`${d} units × ${probes} probes, ${m} features: MatMul limit ${gemmEpochSeconds.toFixed(2)} s/epoch (${gflops.toFixed(1)} GFLOP/s), training ${trainEpochSeconds.toFixed(2)} s/epoch → ${(gemmEpochSeconds / trainEpochSeconds).toFixed(2)}× of the limit; peak RSS ${peakRssMiB.toFixed(0)} MiB`);
  return { sizes, features: m, gemmEpochSeconds, trainEpochSeconds, ratio: gemmEpochSeconds / trainEpochSeconds, loopBatchSeconds, ortBatchSeconds, gflops, peakRssMiB };
}
