/**
 * Child process for the scoring figures: scores one study with core/score/job.ts scoreStudy and prints
 * {seconds, units, baselineRssKb, peakRssKb} as one JSON line. Stored scores are dropped first so the job runs.
 *   node --import tsx bench/child/score.ts <study>
 */
import { openStudyDb } from '../../core/store/study.ts';
import { clearScores } from '../../core/store/scores.ts';
import { scoreStudy } from '../../core/score/job.ts';

const file = process.argv[2];
const db = openStudyDb(file);
try {
  clearScores(db);
  const baselineRssKb = process.resourceUsage().maxRSS;
  const start = process.hrtime.bigint();
  const summary = scoreStudy(db);
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  console.log(JSON.stringify({ seconds, units: summary.units, layers: summary.layers, baselineRssKb, peakRssKb: process.resourceUsage().maxRSS }));
} finally {
  db.close();
}
