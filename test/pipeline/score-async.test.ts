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
import { tempDir } from '../support/fixtures.ts';

const dump = (file: string) => {
  const db = openStudyDb(file);
  try {
    return db.prepare(`SELECT layer_id, unit, rank, concept_count, selectivity, flags, drivers, explanation FROM unit_score ORDER BY layer_id, unit`).all();
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
    setTimeout(() => abort.abort(), 30);
    await expect(scoreStudyAsync(db, {}, { signal: abort.signal })).rejects.toMatchObject({ code: 'cancelled' });
    expect(db.prepare(`SELECT count(*) FROM unit_score`).pluck().get()).toBe(0);
    db.close();
  });
});
