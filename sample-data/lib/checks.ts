/** Checks the build prints: the ONNX file agrees with the TypeScript forward pass, and which labels drive each unit. */
import * as ort from 'onnxruntime-node';
import { aurocFromRanks, averageRanks } from './auroc';
import { evaluate, type NetParams } from './net';
import { MODEL_INPUT, MODEL_OUTPUT } from './onnx-export';
import { CONCEPTS, CONCEPT_COUNT, FAMILY_COUNT, TILE_CHANNELS, TILE_SIZE, TILE_VALUES, conceptIndex, type TileSet } from './scene';

/** Largest |ONNX Runtime output − TypeScript forward output| over every probe and concept. */
export async function maxDeviationFromOnnxRuntime(modelBytes: Uint8Array, params: NetParams, set: TileSet): Promise<number> {
  const session = await ort.InferenceSession.create(modelBytes);
  try {
    const expected = evaluate(params, set).probabilities;
    const batch = 256;
    let worst = 0;
    for (let start = 0; start < set.count; start += batch) {
      const count = Math.min(batch, set.count - start);
      const input = new ort.Tensor('float32', set.tiles.slice(start * TILE_VALUES, (start + count) * TILE_VALUES), [
        count, TILE_CHANNELS, TILE_SIZE, TILE_SIZE,
      ]);
      const result = await session.run({ [MODEL_INPUT]: input });
      const got = result[MODEL_OUTPUT].data as Float32Array;
      for (let k = 0; k < count * CONCEPT_COUNT; k++) {
        worst = Math.max(worst, Math.abs(got[k] - expected[start * CONCEPT_COUNT + k]));
      }
    }
    return worst;
  } finally {
    await session.release();
  }
}

export interface UnitSelectivity {
  unit: number;
  /** Labels whose AUROC (unit activation as the score, label vs the rest) exceeds the threshold. */
  hits: { label: string; group: string; auroc: number }[];
  families: string[];
}

/** For each of `width` units (activations [count, width]), the labels it separates above `threshold`. */
export function unitSelectivity(activations: Float64Array, width: number, set: TileSet, threshold: number): UnitSelectivity[] {
  const positives = CONCEPTS.map(() => new Uint8Array(set.count));
  for (let i = 0; i < set.count; i++) {
    for (let f = 0; f < FAMILY_COUNT; f++) positives[conceptIndex(set, i, f)][i] = 1;
  }
  const column = new Float64Array(set.count);
  const result: UnitSelectivity[] = [];
  for (let unit = 0; unit < width; unit++) {
    for (let i = 0; i < set.count; i++) column[i] = activations[i * width + unit];
    const ranks = averageRanks(column);
    const hits = CONCEPTS.map((c, k) => ({ label: c.label, group: c.group, auroc: aurocFromRanks(ranks, positives[k]) }))
      .filter((h) => h.auroc > threshold)
      .sort((a, b) => b.auroc - a.auroc);
    result.push({ unit, hits, families: [...new Set(hits.map((h) => h.group))].sort() });
  }
  return result;
}

/** Printable lines for one layer, ending with how many units reach two or more families. */
export function describeLayer(layer: string, units: UnitSelectivity[]): string[] {
  const lines = units.map((u) => {
    const hits = u.hits.map((h) => `${h.label} ${h.auroc.toFixed(2)}`).join(', ') || '(none)';
    return `  ${layer}[${u.unit}]  ${hits}  — families: ${u.families.join(', ') || '-'}`;
  });
  const mixed = units.filter((u) => u.families.length >= 2).length;
  const single = units.filter((u) => u.families.length === 1).length;
  lines.push(`  ${layer}: ${mixed} of ${units.length} units reach ≥2 families, ${single} reach one, ${units.length - mixed - single} none`);
  return lines;
}
