/**
 * Resume after a hard kill: SIGKILL a scan child process midway, rerun it, and the study must equal an
 * uninterrupted scan exactly — every activation byte and every score. (Crash-consistency of SQLite transactions
 * in WAL mode is SQLite's documented guarantee; the test checks Skein commits whole chunks only.)
 */
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { openStudyDb } from '../../core/store/study.ts';
import { readBinding, readLayers } from '../../core/store/binding.ts';
import { doneChunks, readChunkSample } from '../../core/store/activations.ts';
import { readUnitScores, readLabelStats } from '../../core/store/scores.ts';
import { tempDir, writePlanted } from '../support/fixtures.ts';

const bin = path.resolve(import.meta.dirname, '../../core/cli/bin.js');

function scanArgs(model: string, probes: string, study: string): string[] {
  return [bin, 'scan', model, probes, '--study', study, '--layers', 'planted', '--batch', '4', '--chunk', '250'];
}

function chunksDone(study: string): number {
  if (!fs.existsSync(study)) return 0;
  try {
    const db = openStudyDb(study, { readonly: true });
    try {
      return readLayers(db).reduce((n, l) => n + doneChunks(db, l.id).size, 0);
    } finally {
      db.close();
    }
  } catch {
    return 0; // not created yet, or the schema is being written
  }
}

/** Everything a scan leaves in a study, read through the store's repositories: activations, scores, label statistics. */
function dump(study: string) {
  const db = openStudyDb(study, { readonly: true });
  try {
    const binding = readBinding(db)!;
    const layers = readLayers(db);
    const name = new Map(layers.map((l) => [l.id, l.name]));
    const chunks = Array.from({ length: Math.ceil(binding.probeCount / binding.chunkSize) }, (_, c) => c);
    const scores = readUnitScores(db);
    return {
      activations: layers.flatMap((l) => [...readChunkSample(db, l.id, chunks)].map((a) => [l.name, a.unit, a.chunk, Buffer.from(a.values.buffer).toString('hex')])),
      scores: scores.map((s) => ({ ...s, layerId: name.get(s.layerId), topProbes: Array.from(s.topProbes), topValues: Array.from(s.topValues) })),
      labelStats: scores.map((s) => readLabelStats(db, s.layerId, s.unit)),
    };
  } finally {
    db.close();
  }
}

describe('resume after SIGKILL', () => {
  let dir: string;
  let model: string;
  let probes: string;
  beforeAll(() => {
    dir = tempDir();
    ({ model, probes } = writePlanted(dir, 20_000, 11));
  });

  it('continues from the committed chunks and ends equal to an uninterrupted scan', async () => {
    const total = 20_000 / 250;
    const killed = path.join(dir, 'killed.study');
    const child = spawn(process.execPath, scanArgs(model, probes, killed), { stdio: ['ignore', 'ignore', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (d) => { stderr += d; });
    const exited = new Promise<NodeJS.Signals | null>((resolve) => child.on('exit', (_code, signal) => resolve(signal)));
    let seen = 0;
    while (child.exitCode === null) {
      seen = chunksDone(killed);
      if (seen >= 3) break;
      await new Promise((r) => setTimeout(r, 5));
    }
    child.kill('SIGKILL');
    expect(await exited).toBe('SIGKILL');
    const atKill = chunksDone(killed);
    expect(atKill, `the scan finished before it could be killed; stderr: ${stderr}`).toBeLessThan(total);
    expect(atKill).toBeGreaterThanOrEqual(3);

    const rerun = spawnSync(process.execPath, scanArgs(model, probes, killed), { encoding: 'utf8' });
    expect(rerun.status, rerun.stderr).toBe(0);
    expect(rerun.stderr).toMatch(/Resuming: \d+ of 80 chunks are already in the study/);

    const clean = path.join(dir, 'clean.study');
    const straight = spawnSync(process.execPath, scanArgs(model, probes, clean), { encoding: 'utf8' });
    expect(straight.status, straight.stderr).toBe(0);

    const a = dump(killed);
    const b = dump(clean);
    expect(a.activations.length).toBe(7 * total);
    expect(a.activations).toEqual(b.activations);
    expect(a.scores).toEqual(b.scores);
    expect(a.labelStats).toEqual(b.labelStats);
  });
});
