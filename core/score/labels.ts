/**
 * Label counts over the whole probe set, computed once per LabelMatrix and shared by every unit:
 * probes per label, per pair and per triple (for the inclusion–exclusion of compositional explanations).
 */
import { SkeinError } from '../errors.ts';
import type { LabelMatrix } from './types.ts';

/** Pair counts are held densely (L×L Int32) up to this many labels (4 MB); above it they are computed on demand. */
const DENSE_PAIR_MAX_LABELS = 1024;
/** On-demand counts are memoized up to this many entries, then the memo starts over (bounded memory). */
const MEMO_LIMIT = 1 << 20;
/** Triple counts are held densely (L³ Int32) while C(L,3) ≤ this, the bound for exhaustive explanation search. */
export const EXHAUSTIVE_TRIPLE_LIMIT = 5000;

export function choose3(n: number): number {
  return n < 3 ? 0 : (n * (n - 1) * (n - 2)) / 6;
}

export class PreparedLabels {
  readonly matrix: LabelMatrix;
  readonly labelTotal: number;
  readonly probeCount: number;
  /** Probes carrying each label. */
  readonly labelCount: Int32Array;
  /** Probes of each label, ascending, in CSR form (the transpose of the LabelMatrix). */
  private readonly probeOffsets: Int32Array;
  private readonly probeIds: Int32Array;
  private readonly densePairs: Int32Array | null;
  private readonly denseTriples: Int32Array | null;
  /** Memo of counts computed on demand when the dense tables would be too large. */
  private readonly pairMemo = new Map<number, number>();
  private readonly tripleMemo = new Map<number, number>();

  constructor(matrix: LabelMatrix) {
    validateLabelMatrix(matrix);
    this.matrix = matrix;
    const labelTotal = matrix.labels.length;
    const probeCount = matrix.count;
    this.labelTotal = labelTotal;
    this.probeCount = probeCount;
    const { labelOffsets, labelIds } = matrix;

    const labelCount = new Int32Array(labelTotal);
    for (let j = 0; j < labelIds.length; j++) labelCount[labelIds[j]]++;
    this.labelCount = labelCount;

    const probeOffsets = new Int32Array(labelTotal + 1);
    for (let l = 0; l < labelTotal; l++) probeOffsets[l + 1] = probeOffsets[l] + labelCount[l];
    const fill = probeOffsets.slice(0, labelTotal);
    const probeIds = new Int32Array(labelIds.length);
    for (let i = 0; i < probeCount; i++) {
      for (let j = labelOffsets[i]; j < labelOffsets[i + 1]; j++) probeIds[fill[labelIds[j]]++] = i;
    }
    this.probeOffsets = probeOffsets;
    this.probeIds = probeIds;

    const densePairs = labelTotal <= DENSE_PAIR_MAX_LABELS ? new Int32Array(labelTotal * labelTotal) : null;
    const denseTriples = choose3(labelTotal) <= EXHAUSTIVE_TRIPLE_LIMIT ? new Int32Array(labelTotal ** 3) : null;
    if (densePairs || denseTriples) {
      for (let i = 0; i < probeCount; i++) {
        const start = labelOffsets[i];
        const end = labelOffsets[i + 1];
        for (let x = start; x < end; x++) {
          for (let y = x + 1; y < end; y++) {
            const a = Math.min(labelIds[x], labelIds[y]);
            const b = Math.max(labelIds[x], labelIds[y]);
            if (densePairs) densePairs[a * labelTotal + b]++;
            if (denseTriples) {
              for (let z = y + 1; z < end; z++) {
                const [u, v, w] = sort3(labelIds[x], labelIds[y], labelIds[z]);
                denseTriples[(u * labelTotal + v) * labelTotal + w]++;
              }
            }
          }
        }
      }
    }
    this.densePairs = densePairs;
    this.denseTriples = denseTriples;
  }

  /** Probes carrying both labels; requires a < b. */
  pairCount(a: number, b: number): number {
    const key = a * this.labelTotal + b;
    if (this.densePairs) return this.densePairs[key];
    let count = this.pairMemo.get(key);
    if (count === undefined) {
      count = this.countCommon(a, b, -1);
      if (this.pairMemo.size >= MEMO_LIMIT) this.pairMemo.clear();
      this.pairMemo.set(key, count);
    }
    return count;
  }

  /** Probes carrying all three labels; requires a < b < c. */
  tripleCount(a: number, b: number, c: number): number {
    const key = (a * this.labelTotal + b) * this.labelTotal + c;
    if (this.denseTriples) return this.denseTriples[key];
    let count = this.tripleMemo.get(key);
    if (count === undefined) {
      count = this.countCommon(a, b, c);
      if (this.tripleMemo.size >= MEMO_LIMIT) this.tripleMemo.clear();
      this.tripleMemo.set(key, count);
    }
    return count;
  }

  /** Size of the intersection of two or three sorted probe lists (c < 0: two). */
  private countCommon(a: number, b: number, c: number): number {
    const ids = this.probeIds;
    let i = this.probeOffsets[a];
    const iEnd = this.probeOffsets[a + 1];
    let j = this.probeOffsets[b];
    const jEnd = this.probeOffsets[b + 1];
    let k = c < 0 ? 0 : this.probeOffsets[c];
    const kEnd = c < 0 ? 0 : this.probeOffsets[c + 1];
    let count = 0;
    while (i < iEnd && j < jEnd) {
      const x = ids[i];
      const y = ids[j];
      if (x < y) i++;
      else if (y < x) j++;
      else {
        if (c < 0) count++;
        else {
          while (k < kEnd && ids[k] < x) k++;
          if (k >= kEnd) break;
          if (ids[k] === x) count++;
        }
        i++;
        j++;
      }
    }
    return count;
  }
}

/** Count tables for a LabelMatrix; build once per probe set and pass to createScratch. */
export function prepareLabels(labels: LabelMatrix): PreparedLabels {
  return new PreparedLabels(labels);
}

export function sort3(a: number, b: number, c: number): [number, number, number] {
  if (a > b) [a, b] = [b, a];
  if (b > c) [b, c] = [c, b];
  if (a > b) [a, b] = [b, a];
  return [a, b, c];
}

function labelError(message: string, where: string): SkeinError {
  return new SkeinError({ code: 'probes', message, where });
}

/** The CSR arrays must be well formed and a probe must not carry the same label twice. */
function validateLabelMatrix(matrix: LabelMatrix): void {
  const { count, labels, labelOffsets, labelIds } = matrix;
  if (!Number.isInteger(count) || count < 1) {
    throw labelError('The probe set has no probes; add at least one labelled probe and scan again.', 'count');
  }
  if (labelOffsets.length !== count + 1 || labelOffsets[0] !== 0 || labelOffsets[count] !== labelIds.length) {
    throw labelError(
      `The label table does not match the ${count} probes (offsets ${labelOffsets.length}, ids ${labelIds.length}); reload the probe set.`,
      'labelOffsets',
    );
  }
  const lastSeen = new Int32Array(labels.length).fill(-1);
  for (let i = 0; i < count; i++) {
    if (labelOffsets[i + 1] < labelOffsets[i]) {
      throw labelError(`The label table is out of order at probe ${i}; reload the probe set.`, `probe ${i}`);
    }
    for (let j = labelOffsets[i]; j < labelOffsets[i + 1]; j++) {
      const id = labelIds[j];
      if (!(id >= 0 && id < labels.length)) {
        throw labelError(`Probe ${i} refers to label id ${id}, but there are ${labels.length} labels; reload the probe set.`, `probe ${i}`);
      }
      if (lastSeen[id] === i) {
        throw labelError(`Probe ${i} carries the label "${labels[id]}" twice; list each label once per probe.`, `probe ${i}`);
      }
      lastSeen[id] = i;
    }
  }
}
