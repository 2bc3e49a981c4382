/**
 * The demo scenario is rebuilt byte for byte: twice in a row, and as committed in sample-data/.
 * Builds in tests go to temporary folders only; the committed files are read, never written.
 */
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { maxDeviationFromOnnxRuntime } from '../../sample-data/lib/checks';
import { FULL_SIZES, MODEL_FILE, PROBE_SET_FOLDER, buildTiles, generateProbes, probeSetFiles } from '../../sample-data/lib/tiles';

const SAMPLE_DATA = path.resolve(__dirname, '../../sample-data');
const SMALL = { probeCount: 40, trainCount: 160, epochs: 2 };

const temporary: string[] = [];
function tempDir(): string {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'skein-tiles-'));
  temporary.push(dir);
  return dir;
}
afterAll(() => {
  for (const dir of temporary) fs.rmSync(dir, { recursive: true, force: true });
});

/** Relative path → bytes of every file below `root`, sorted by path. */
function readTree(root: string): Map<string, Buffer> {
  const out = new Map<string, Buffer>();
  const walk = (dir: string) => {
    for (const entry of fs.readdirSync(dir, { withFileTypes: true }).sort((a, b) => a.name.localeCompare(b.name))) {
      const full = path.join(dir, entry.name);
      if (entry.isDirectory()) walk(full);
      else out.set(path.relative(root, full), fs.readFileSync(full));
    }
  };
  walk(root);
  return out;
}

function committedStamp(): string {
  const files = [path.join(SAMPLE_DATA, MODEL_FILE), path.join(SAMPLE_DATA, PROBE_SET_FOLDER, 'manifest.json')];
  return files.map((f) => `${f}:${fs.statSync(f).mtimeMs}`).join('|');
}

describe('tiles demo build', () => {
  it('gives byte-identical files when run twice, and leaves sample-data/ alone', () => {
    const before = committedStamp();
    const first = tempDir();
    const second = tempDir();
    buildTiles({ outDir: first, ...SMALL });
    buildTiles({ outDir: second, ...SMALL });
    const a = readTree(first);
    const b = readTree(second);
    expect([...a.keys()]).toEqual([...b.keys()]);
    for (const [file, bytes] of a) expect(bytes.equals(b.get(file)!), file).toBe(true);
    // manifest, five data files (tiles, labels, targets, concepts, examples), one preview per probe, and the model
    expect(a.size).toBe(6 + SMALL.probeCount + 1);
    expect([...a.keys()].some((f) => f.includes('.partial'))).toBe(false);
    expect(committedStamp()).toBe(before);
  });

  it('exports a model that onnxruntime-node runs to the same outputs as the TypeScript forward pass', async () => {
    const dir = tempDir();
    const result = buildTiles({ outDir: dir, ...SMALL });
    const deviation = await maxDeviationFromOnnxRuntime(fs.readFileSync(result.modelPath), result.params, result.probes);
    expect(deviation).toBeLessThan(1e-4);
  });

  it('matches the committed probe set exactly (the committed files come from this script)', () => {
    const expected = probeSetFiles(generateProbes(FULL_SIZES.probeCount));
    const committed = readTree(path.join(SAMPLE_DATA, PROBE_SET_FOLDER));
    expect([...committed.keys()].sort()).toEqual([...expected.keys()].sort());
    for (const [file, bytes] of expected) {
      expect(Buffer.from(bytes).equals(committed.get(file)!), file).toBe(true);
    }
  });
});
