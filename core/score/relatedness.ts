/**
 * Label relatedness Z in [0, 1] (1 on the diagonal), the similarity the concept count uses.
 * For each pair the first rule that applies wins:
 *  1. the user's override rows;
 *  2. concepts.csv, when both labels are listed: same group and related parent → 0.75, same group → 0.5,
 *     different groups → 0 (our constants: a shared parent is closer than a shared group; nothing crosses groups);
 *     "related parent" = both have the same non-empty parent, or one label is the other's parent;
 *  3. WordNet Wu–Palmer of the labels' most frequent noun senses (see WordNet.labelSimilarity), rescaled by
 *     max(0, (wup − 0.5)/0.5) so unrelated nouns (wup ≈ 0.3–0.5) get 0, when both are WordNet nouns;
 *  4. co-occurrence on the probe set: max(0, NPMI) (Bouma 2009).
 */
import { SkeinError } from '../errors.ts';
import type { ConceptRow } from '../probes/types.ts';
import { prepareLabels } from './labels.ts';
import { normalizedPmi, wuPalmerToRelatedness } from './stats.ts';
import type { LabelMatrix, Relatedness, RelatednessSource } from './types.ts';
import { installedWordNet, type WordNet } from './wordnet.ts';

/** Concept-table relatedness constants (our choice, see the header). */
export const SAME_PARENT_RELATEDNESS = 0.75;
export const SAME_GROUP_RELATEDNESS = 0.5;

export interface RelatednessOptions {
  /** Use WordNet for pairs the override and concepts do not cover (default true). */
  wordnet?: boolean;
}

function conceptRelatedness(a: ConceptRow, b: ConceptRow): number {
  if (a.group !== b.group) return 0;
  const parentA = a.parent?.trim() ?? '';
  const parentB = b.parent?.trim() ?? '';
  const related = (parentA !== '' && parentA === parentB) || parentA === b.label || parentB === a.label;
  return related ? SAME_PARENT_RELATEDNESS : SAME_GROUP_RELATEDNESS;
}

/**
 * Z over `labels` (use labelMatrix.labels for finishLayer, which indexes Z by label id).
 * Every name in `labels` must be a label of `labelMatrix`.
 */
export function buildRelatedness(
  labels: string[],
  labelMatrix: LabelMatrix,
  concepts: ConceptRow[] | null,
  override: { a: string; b: string; similarity: number }[] | null,
  opts: RelatednessOptions = {},
): Relatedness {
  const size = labels.length;
  const position = new Map<string, number>();
  labels.forEach((name, i) => {
    if (position.has(name)) {
      throw new SkeinError({ code: 'request', message: `The label "${name}" is listed twice; list each label once.`, where: 'labels' });
    }
    position.set(name, i);
  });
  const matrixId = new Map(labelMatrix.labels.map((name, id) => [name, id]));
  const ids = labels.map((name) => {
    const id = matrixId.get(name);
    if (id === undefined) {
      throw new SkeinError({ code: 'request', message: `The label "${name}" is not in the probe set; score with the probe set's labels.`, where: 'labels' });
    }
    return id;
  });

  const matrix = new Float64Array(size * size);
  const source: RelatednessSource[] = new Array(size * size);
  const decided = new Uint8Array(size * size);
  const set = (i: number, j: number, value: number, from: RelatednessSource) => {
    for (const cell of [i * size + j, j * size + i]) {
      matrix[cell] = value;
      source[cell] = from;
      decided[cell] = 1;
    }
  };
  for (let i = 0; i < size; i++) set(i, i, 1, 'identity');

  (override ?? []).forEach((row, k) => {
    const where = `relatedness row ${k + 1}`;
    const i = position.get(row.a);
    const j = position.get(row.b);
    if (i === undefined || j === undefined) {
      const missing = i === undefined ? row.a : row.b;
      throw new SkeinError({ code: 'probes', message: `The relatedness override names "${missing}", which no probe carries; fix or remove the row.`, where });
    }
    if (!(row.similarity >= 0 && row.similarity <= 1)) {
      throw new SkeinError({ code: 'probes', message: `The relatedness override for "${row.a}" and "${row.b}" is ${row.similarity}; use a number from 0 to 1.`, where });
    }
    if (i !== j) set(i, j, row.similarity, 'override'); // a label's relatedness to itself stays 1
  });

  const conceptOf = new Map<string, ConceptRow>();
  for (const row of concepts ?? []) if (!conceptOf.has(row.label)) conceptOf.set(row.label, row);

  const useWordNet = opts.wordnet ?? true;
  let wordnet: WordNet | null = null;
  const prepared = prepareLabels(labelMatrix);

  for (let i = 0; i < size; i++) {
    for (let j = i + 1; j < size; j++) {
      if (decided[i * size + j]) continue;
      const conceptA = conceptOf.get(labels[i]);
      const conceptB = conceptOf.get(labels[j]);
      if (conceptA && conceptB) {
        set(i, j, conceptRelatedness(conceptA, conceptB), 'concepts');
        continue;
      }
      if (useWordNet) {
        wordnet ??= installedWordNet();
        const wup = wordnet.labelSimilarity(labels[i], labels[j]);
        if (wup !== null) {
          set(i, j, wuPalmerToRelatedness(wup), 'wordnet');
          continue;
        }
      }
      const a = Math.min(ids[i], ids[j]);
      const b = Math.max(ids[i], ids[j]);
      const npmi = normalizedPmi(prepared.pairCount(a, b), prepared.labelCount[a], prepared.labelCount[b], prepared.probeCount);
      set(i, j, Math.max(0, npmi), 'cooccurrence');
    }
  }
  return { labels: [...labels], matrix, source };
}
