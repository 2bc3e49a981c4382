/** Seeded data for the score tests (the data are ours; check values name their own sources). */
import type { LabelMatrix } from '../../core/score/types.ts';

/** The seeded generator the demo build uses (mulberry32). */
import { mulberry32 as seededRandom } from '../../sample-data/lib/prng.ts';

export { seededRandom };

/** Standard normal by Box–Muller (Box & Muller 1958). */
export function seededNormal(random: () => number): () => number {
  return () => Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
}

/** A LabelMatrix from per-probe label-name lists; label ids follow the order of `labels`. */
export function labelMatrixOf(labels: string[], perProbe: string[][]): LabelMatrix {
  const id = new Map(labels.map((name, i) => [name, i]));
  const offsets = new Int32Array(perProbe.length + 1);
  const ids: number[] = [];
  perProbe.forEach((names, i) => {
    for (const name of names) ids.push(id.get(name)!);
    offsets[i + 1] = ids.length;
  });
  return { count: perProbe.length, labels, labelOffsets: offsets, labelIds: Int32Array.from(ids) };
}
