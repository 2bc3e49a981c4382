/**
 * The app's API host scores with scoreStudyAsync so that progress polls and cancel requests are answered during
 * scoring. It must give exactly the synchronous job's scores, keep the event loop turning, and stop on cancel.
 * (Behaviour of our own job runner: common practice, no source.)
 */
import path from 'node:path';
import fs from 'node:fs';
import { describe, expect, it } from 'vitest';
import { openStudyDb } from '../../core/store/study.ts';
import { scoreStudy, scoreStudyAsync } from '../../core/score/job.ts';
import { buildStudy } from '../../bench/lib/study.ts';
import { hasScores, readUnitScores } from '../../core/store/scores.ts';
import type { ProgressReport } from '../../core/extract/progress.ts';
import { tempDir } from '../support/fixtures.ts';

const dump = (file: string) => {
  const db = openStudyDb(file);
  try {
    return readUnitScores(db).map((s) => ({ ...s, topProbes: Array.from(s.topProbes), topValues: Array.from(s.topValues) }));
  } finally {
    db.close();
  }
};

describe('scoring off the event loop', () => {
  const dir = tempDir();
  const a = path.join(dir, 'a.study');
  buildStudy(a, { probes: 20_000, units: 300, labels: 12, seed: 3 });
  const b = path.join(dir, 'b.study');
  fs.copyFileSync(a, b);

  it('gives the same scores as the synchronous job while timers keep firing', async () => {
    const dbA = openStudyDb(a);
    scoreStudy(dbA);
    dbA.close();
    const dbB = openStudyDb(b);
    let ticks = 0;
    const timer = setInterval(() => ticks++, 5);
    const summary = await scoreStudyAsync(dbB);
    clearInterval(timer);
    dbB.close();
    expect(summary.reused).toBe(false);
    expect(ticks).toBeGreaterThan(0);
    expect(dump(b)).toEqual(dump(a));
  });

  it('stops on cancel during scoring and writes no partial scores', async () => {
    const c = path.join(dir, 'c.study');
    buildStudy(c, { probes: 20_000, units: 300, labels: 12, seed: 3 });
    const db = openStudyDb(c);
    const abort = new AbortController();
    // Cancel on the second progress event (the first is the job's start), not after a timer: the same point every run.
    const seen: ProgressReport[] = [];
    const onProgress = (p: ProgressReport) => { seen.push(p); if (seen.length === 2) abort.abort(); };
    await expect(scoreStudyAsync(db, {}, { signal: abort.signal, onProgress })).rejects.toMatchObject({ code: 'cancelled' });
    expect(seen).toHaveLength(2);
    expect(seen[1].done).toBeGreaterThan(0);
    expect(seen[1].done).toBeLessThan(seen[1].total); // cancelled part-way, not after the last unit
    expect(hasScores(db)).toBe(false);
    expect(readUnitScores(db)).toEqual([]);
    db.close();
  });
});
