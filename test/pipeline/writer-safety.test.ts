/**
 * Nothing lost (issue 10): a model onnxruntime refuses must not discard what a study holds, a failed scan of a new
 * study leaves no file, and one study has one writer at a time, with a lock that dies with its process.
 */
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { runScan } from '../../core/api/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { readBinding } from '../../core/store/binding.ts';
import { hasScores } from '../../core/store/scores.ts';
import { lockPathOf } from '../../core/store/lock.ts';
import { buildModel } from '../../core/model/writer.ts';
import { tempDir, writePlanted, plantedProbes, PLANTED_UNITS } from '../support/fixtures.ts';

const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');

/** The planted graph with one thing onnxruntime refuses: an unknown op, opset 99, or an op of an unknown domain. */
function brokenModel(kind: 'op' | 'opset' | 'domain'): Uint8Array {
  const { width } = plantedProbes(1, 1);
  const units = PLANTED_UNITS.length;
  return buildModel({
    name: 'broken', opset: kind === 'opset' ? 99 : undefined,
    inputs: [{ name: 'x', elemType: 'float32', dims: ['batch', width] }],
    outputs: [{ name: 'logits', elemType: 'float32', dims: ['batch', 2] }],
    initializers: [
      { name: 'W', dims: [width, units], data: new Float32Array(width * units) },
      { name: 'b', dims: [units], data: new Float32Array(units) },
      { name: 'H', dims: [units, 2], data: new Float32Array(units * 2) },
    ],
    nodes: [
      { op: 'Gemm', name: 'hidden', inputs: ['x', 'W', 'b'], outputs: ['pre'] },
      kind === 'op' ? { op: 'Frobnicate', name: 'act', inputs: ['pre'], outputs: ['planted'] }
        : kind === 'domain' ? { op: 'Relu', domain: 'com.example.custom', name: 'act', inputs: ['pre'], outputs: ['planted'] }
        : { op: 'Relu', name: 'act', inputs: ['pre'], outputs: ['planted'] },
      { op: 'Gemm', name: 'head', inputs: ['planted', 'H'], outputs: ['logits'] },
    ],
  });
}

function studyState(study: string) {
  const db = openStudyDb(study, { readonly: true });
  try {
    const b = readBinding(db);
    return { modelFp: b?.modelFp, scored: hasScores(db) };
  } finally {
    db.close();
  }
}

describe('a model that cannot run discards nothing', () => {
  let dir: string, model: string, probes: string, study: string;
  beforeAll(async () => {
    dir = tempDir();
    ({ model, probes } = writePlanted(dir, 600, 3));
    study = path.join(dir, 'kept.study');
    await runScan({ model, probes, study, layers: ['planted'], batch: 64 });
  });

  for (const kind of ['op', 'opset', 'domain'] as const) {
    it(`keeps the cached scan when the new model has an unsupported ${kind}`, async () => {
      const before = studyState(study);
      expect(before.scored).toBe(true);
      const bad = path.join(dir, `broken-${kind}.onnx`);
      fs.writeFileSync(bad, brokenModel(kind));
      const notes: string[] = [];
      await expect(runScan({ model: bad, probes, study, layers: ['planted'] }, { onNote: (m) => notes.push(m) })).rejects.toMatchObject({ code: 'model' });
      expect(notes.join('\n')).not.toMatch(/discarded/);
      expect(studyState(study)).toEqual(before);
    });
  }

  it("translates onnxruntime's refusal into one line naming the opset; --verbose adds onnxruntime's own text", () => {
    // onnxruntime prints its source path and a C++ signature before the reason (seen with onnxruntime-node 1.30).
    const bad = path.join(dir, 'broken-opset-cli.onnx');
    fs.writeFileSync(bad, brokenModel('opset'));
    const run = (extra: string[]) => spawnSync(process.execPath, [bin, 'scan', bad, probes, '--study', path.join(dir, 'cli-opset.study'), '--layers', 'planted', ...extra], { encoding: 'utf8' });
    const plain = run([]);
    expect(plain.status).toBe(1);
    const lines = plain.stderr.trim().split('\n');
    expect(lines).toHaveLength(1);
    expect(lines[0]).toMatch(/^skein: .*broken-opset-cli\.onnx, opset_import: The model declares opset 99 for domain ai\.onnx, and this onnxruntime supports up to opset \d+\. Re-export the model at opset \d+ or lower/);
    expect(lines[0]).not.toMatch(/onnxruntime_src|::|\.h:\d+/);
    const verbose = run(['--verbose']);
    expect(verbose.status).toBe(1);
    expect(verbose.stderr.trim().split('\n')[1]).toMatch(/^skein: the original message: .*model_load_utils\.h:\d+ .*ValidateOpsetForDomain\(/);
    expect(fs.existsSync(path.join(dir, 'cli-opset.study'))).toBe(false);
  });

  it('leaves no study file behind when a scan of a new study fails', async () => {
    const bad = path.join(dir, 'broken-new.onnx');
    fs.writeFileSync(bad, brokenModel('op'));
    const fresh = path.join(dir, 'never.study');
    await expect(runScan({ model: bad, probes, study: fresh, layers: ['planted'] })).rejects.toMatchObject({ code: 'model' });
    expect(fs.readdirSync(dir).filter((f) => f.startsWith('never.study'))).toEqual([]);
  });
});

describe('one writer per study', () => {
  let dir: string, model: string, probes: string;
  beforeAll(() => {
    dir = tempDir();
    ({ model, probes } = writePlanted(dir, 6000, 4));
  });

  it('refuses a second scan of a study while one runs, naming it, and the first finishes unmixed', async () => {
    const study = path.join(dir, 'one.study');
    const first = runScan({ model, probes, study, layers: ['planted'], batch: 16 });
    await expect(runScan({ model, probes, study, layers: ['pre'] })).rejects.toMatchObject({
      code: 'study', where: 'lock', message: expect.stringMatching(/Another job is writing this study: a scan started .* in this session/),
    });
    const r = await first;
    expect(r.layers.map((l) => l.name)).toEqual(['planted']);
    expect(fs.existsSync(lockPathOf(study))).toBe(false);
    expect(studyState(study).scored).toBe(true);
  });

  it('refuses while another process scans; the lock dies with that process (kill -9)', async () => {
    const study = path.join(dir, 'two.study');
    const child = spawn(process.execPath, [bin, 'scan', model, probes, '--study', study, '--layers', 'planted', '--batch', '1', '--chunk', '200'], { stdio: 'ignore' });
    try {
      const lock = lockPathOf(study);
      for (let i = 0; i < 600 && !fs.existsSync(lock); i++) await new Promise((r) => setTimeout(r, 50));
      expect(fs.existsSync(lock)).toBe(true);
      await expect(runScan({ model, probes, study, layers: ['planted'] })).rejects.toMatchObject({
        where: 'lock', message: expect.stringContaining(`a scan started`),
      });
      await expect(runScan({ model, probes, study, layers: ['planted'] })).rejects.toThrow(`by process ${child.pid}`);
    } finally {
      child.kill('SIGKILL');
      await new Promise((r) => child.once('exit', r));
    }
    // The killed scan's lock file is still there, but its process is gone: the next scan takes over and finishes.
    const r = await runScan({ model, probes, study, layers: ['planted'], batch: 64 });
    expect(r.probes).toBe(6000);
    expect(fs.existsSync(lockPathOf(study))).toBe(false);
  });
});

describe('a read never creates or writes a study', () => {
  it('skein rank on a 0-byte file refuses and leaves it 0 bytes, with no side files', () => {
    const dir = tempDir();
    const empty = path.join(dir, 'empty.study');
    fs.writeFileSync(empty, '');
    const r = spawnSync(process.execPath, [bin, 'rank', empty], { encoding: 'utf8' });
    expect(r.status).not.toBe(0);
    expect(r.stderr).toMatch(/empty, not a study/);
    expect(fs.statSync(empty).size).toBe(0);
    expect(fs.readdirSync(dir)).toEqual(['empty.study']);
  });
});
