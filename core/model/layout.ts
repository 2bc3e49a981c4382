/** How Skein reads the per-sample axes of a captured tensor as units, and the model input's batch axis. */
import { SkeinError } from '../errors.ts';
import type { ValueInfo } from './types.ts';

export interface UnitLayout {
  kind: 'dense' | 'conv' | 'sequence' | 'flat';
  /** Number of units: features (dense), channels (conv), hidden size (sequence), all values (flat). */
  units: number;
  /** [H, W] of a conv feature map. */
  spatial?: [number, number];
  /** Sequence length T. */
  steps?: number;
  warning?: string;
}

/**
 * Layout of per-sample dims (after the batch axis), by rank (common practice, no source):
 * [H] dense, H units; [C, H, W] conv (NCHW, ONNX's Conv layout), C units over H×W positions;
 * [T, H] sequence, H units over T steps; any other rank flat, every value its own unit.
 */
export function unitLayout(dims: number[]): UnitLayout {
  if (dims.some((d) => !Number.isInteger(d) || d < 1)) {
    throw new SkeinError({ code: 'model', where: `shape [${dims.join(', ')}]`, message: `A captured tensor has an empty or unknown dimension ([${dims.join(', ')}] per sample), so it has no units to study. Choose another tensor.` });
  }
  if (dims.length === 1) return { kind: 'dense', units: dims[0] };
  if (dims.length === 2) return { kind: 'sequence', units: dims[1], steps: dims[0] };
  if (dims.length === 3) return { kind: 'conv', units: dims[0], spatial: [dims[1], dims[2]] };
  const units = dims.reduce((a, b) => a * b, 1);
  const warning = dims.length === 0
    ? 'The tensor holds one value per sample; it is studied as a single unit.'
    : `The tensor has ${dims.length} axes per sample ([${dims.join(', ')}]); Skein treats each of its ${units} values as its own unit.`;
  return { kind: 'flat', units, warning };
}

/** A numeric first input dim (e.g. 1) is fixed and the runner must use exactly that batch size. */
export function batchPolicy(input: ValueInfo): { fixed: number | null } {
  const first = input.dims?.[0];
  return { fixed: typeof first === 'number' && first > 0 ? first : null };
}
