/**
 * Compositional explanation (Mu & Andreas 2020), restricted to OR-formulas of up to 3 labels:
 * the formula F = P_a ∪ P_b ∪ P_c whose probe set best matches the unit's top set M by IoU.
 *
 * |F| comes from label, pair and triple counts over all probes by inclusion–exclusion, |M∩F| the same way from
 * counts inside the top set. Only labels with at least one probe inside M can be part of the best formula: adding a
 * label with no hit leaves |M∩F| unchanged and cannot shrink |F|, so IoU cannot rise. With h such labels the search
 * is exhaustive when C(h,3) ≤ 5000 (the same bound as C(L,3) ≤ 5000, but usually reached for far larger L), and a
 * beam search of width 5 over formula length otherwise (as Mu & Andreas do). Ties (within 1e-12) prefer fewer labels,
 * then the lexicographically smallest label ids.
 */
import { EXHAUSTIVE_TRIPLE_LIMIT, choose3, sort3, type PreparedLabels } from './labels.ts';
import { intersectionOverUnion } from './stats.ts';
import type { Explanation } from './types.ts';

const BEAM_WIDTH = 5;
const IOU_TIE = 1e-12;

/** Reusable per-unit buffers for explain(). */
export interface ExplainScratch {
  hitLabels: Int32Array;                 // length L
  insidePairs: Map<number, number>;       // key a·L + b (a < b): probes in M with both
  insideTriples: Map<number, number>;     // key (a·L + b)·L + c (a < b < c)
}

export function createExplainScratch(labelTotal: number): ExplainScratch {
  return { hitLabels: new Int32Array(labelTotal), insidePairs: new Map(), insideTriples: new Map() };
}

interface Candidate { labels: number[]; iou: number }

function isBetter(iou: number, length: number, best: Candidate | null): boolean {
  if (best === null) return true;
  if (iou > best.iou + IOU_TIE) return true;
  return Math.abs(iou - best.iou) <= IOU_TIE && length < best.labels.length;
}

/**
 * Best OR-formula for a unit whose top set is `topSet` (probe ids); `topHits[l]` = probes of M carrying label l.
 * Returns null when the top set is empty or no label has a probe in it.
 */
export function explainTopSet(
  prepared: PreparedLabels,
  topSet: Int32Array,
  topHits: Int32Array,
  scratch: ExplainScratch,
): Explanation | null {
  const labelTotal = prepared.labelTotal;
  const topSize = topSet.length;
  if (topSize === 0) return null;
  let hitCount = 0;
  for (let l = 0; l < labelTotal; l++) if (topHits[l] > 0) scratch.hitLabels[hitCount++] = l;
  if (hitCount === 0) return null;
  const hitLabels = scratch.hitLabels.subarray(0, hitCount);
  countInside(prepared, topSet, scratch);
  const best =
    choose3(hitCount) <= EXHAUSTIVE_TRIPLE_LIMIT
      ? exhaustive(prepared, hitLabels, topHits, topSize, scratch)
      : beam(prepared, hitLabels, topHits, topSize, scratch);
  return { labels: best.labels, iou: best.iou };
}

/** Pair and triple counts inside the top set, by enumerating each top-set probe's labels. */
function countInside(prepared: PreparedLabels, topSet: Int32Array, scratch: ExplainScratch): void {
  const { labelOffsets, labelIds } = prepared.matrix;
  const labelTotal = prepared.labelTotal;
  const pairs = scratch.insidePairs;
  const triples = scratch.insideTriples;
  pairs.clear();
  triples.clear();
  for (let t = 0; t < topSet.length; t++) {
    const probe = topSet[t];
    const start = labelOffsets[probe];
    const end = labelOffsets[probe + 1];
    for (let x = start; x < end; x++) {
      for (let y = x + 1; y < end; y++) {
        const a = Math.min(labelIds[x], labelIds[y]);
        const b = Math.max(labelIds[x], labelIds[y]);
        const pairKey = a * labelTotal + b;
        pairs.set(pairKey, (pairs.get(pairKey) ?? 0) + 1);
        for (let z = y + 1; z < end; z++) {
          const [u, v, w] = sort3(labelIds[x], labelIds[y], labelIds[z]);
          const tripleKey = (u * labelTotal + v) * labelTotal + w;
          triples.set(tripleKey, (triples.get(tripleKey) ?? 0) + 1);
        }
      }
    }
  }
}

function exhaustive(
  prepared: PreparedLabels,
  hitLabels: Int32Array,
  topHits: Int32Array,
  topSize: number,
  scratch: ExplainScratch,
): Candidate {
  const labelTotal = prepared.labelTotal;
  const counts = prepared.labelCount;
  const pairsIn = scratch.insidePairs;
  const triplesIn = scratch.insideTriples;
  const h = hitLabels.length;
  let best: Candidate | null = null;
  for (let x = 0; x < h; x++) {
    const a = hitLabels[x];
    const interA = topHits[a];
    const sizeA = counts[a];
    const iouA = intersectionOverUnion(interA, topSize, sizeA);
    if (isBetter(iouA, 1, best)) best = { labels: [a], iou: iouA };
    for (let y = x + 1; y < h; y++) {
      const b = hitLabels[y];
      const inAB = pairsIn.get(a * labelTotal + b) ?? 0;
      const interAB = interA + topHits[b] - inAB;
      const sizeAB = sizeA + counts[b] - prepared.pairCount(a, b);
      const iouAB = intersectionOverUnion(interAB, topSize, sizeAB);
      if (isBetter(iouAB, 2, best)) best = { labels: [a, b], iou: iouAB };
      for (let z = y + 1; z < h; z++) {
        const c = hitLabels[z];
        const inAC = pairsIn.get(a * labelTotal + c) ?? 0;
        const inBC = pairsIn.get(b * labelTotal + c) ?? 0;
        const inABC = triplesIn.get((a * labelTotal + b) * labelTotal + c) ?? 0;
        const interABC = interAB + topHits[c] - inAC - inBC + inABC;
        const sizeABC =
          sizeAB + counts[c] - prepared.pairCount(a, c) - prepared.pairCount(b, c) + prepared.tripleCount(a, b, c);
        const iouABC = intersectionOverUnion(interABC, topSize, sizeABC);
        if (isBetter(iouABC, 3, best)) best = { labels: [a, b, c], iou: iouABC };
      }
    }
  }
  return best!;
}

/** IoU of the OR of 1–3 sorted labels, by inclusion–exclusion. */
function formulaIou(
  labels: number[],
  prepared: PreparedLabels,
  topHits: Int32Array,
  topSize: number,
  scratch: ExplainScratch,
): number {
  const labelTotal = prepared.labelTotal;
  let inter = 0;
  let size = 0;
  for (const l of labels) {
    inter += topHits[l];
    size += prepared.labelCount[l];
  }
  for (let x = 0; x < labels.length; x++) {
    for (let y = x + 1; y < labels.length; y++) {
      inter -= scratch.insidePairs.get(labels[x] * labelTotal + labels[y]) ?? 0;
      size -= prepared.pairCount(labels[x], labels[y]);
    }
  }
  if (labels.length === 3) {
    const [a, b, c] = labels;
    inter += scratch.insideTriples.get((a * labelTotal + b) * labelTotal + c) ?? 0;
    size += prepared.tripleCount(a, b, c);
  }
  return intersectionOverUnion(inter, topSize, size);
}

/** Candidate order: IoU descending (ties within 1e-12), then label ids lexicographically. */
function ranksBefore(p: Candidate, q: Candidate): boolean {
  if (Math.abs(p.iou - q.iou) > IOU_TIE) return p.iou > q.iou;
  for (let i = 0; i < Math.min(p.labels.length, q.labels.length); i++) {
    if (p.labels[i] !== q.labels[i]) return p.labels[i] < q.labels[i];
  }
  return p.labels.length < q.labels.length;
}

/** Keeps the best BEAM_WIDTH candidates, best first (insertion into a short sorted list). */
function offer(beamList: Candidate[], candidate: Candidate): void {
  if (beamList.length === BEAM_WIDTH && !ranksBefore(candidate, beamList[BEAM_WIDTH - 1])) return;
  let at = beamList.length;
  while (at > 0 && ranksBefore(candidate, beamList[at - 1])) at--;
  beamList.splice(at, 0, candidate);
  if (beamList.length > BEAM_WIDTH) beamList.pop();
}

function beam(
  prepared: PreparedLabels,
  hitLabels: Int32Array,
  topHits: Int32Array,
  topSize: number,
  scratch: ExplainScratch,
): Candidate {
  const labelTotal = prepared.labelTotal;
  let kept: Candidate[] = [];
  for (const l of hitLabels) offer(kept, { labels: [l], iou: formulaIou([l], prepared, topHits, topSize, scratch) });
  let best: Candidate = kept[0];
  const seen = new Set<number>();
  for (let length = 2; length <= 3; length++) {
    const next: Candidate[] = [];
    seen.clear();
    for (const formula of kept) {
      for (const l of hitLabels) {
        if (formula.labels.includes(l)) continue;
        const labels = [...formula.labels, l].sort((p, q) => p - q);
        let key = 0;
        for (const id of labels) key = key * labelTotal + id;
        if (seen.has(key)) continue;
        seen.add(key);
        offer(next, { labels, iou: formulaIou(labels, prepared, topHits, topSize, scratch) });
      }
    }
    if (next.length === 0) break;
    if (isBetter(next[0].iou, length, best)) best = next[0];
    kept = next;
  }
  return best;
}
