/**
 * Child process for the lens figure: computes one layer's lens with core/geometry (nothing cached) and prints
 * {seconds, cpuSeconds, effectiveDimensions, auroc, peakRssKb} as one JSON line.
 *   node --import tsx bench/child/lens.ts <study> <layer>
 */
import { openStudyDb } from '../../core/store/study.ts';
import { computeLens } from '../../core/geometry/index.ts';

const [file, layer] = process.argv.slice(2);
const db = openStudyDb(file);
try {
  const start = process.hrtime.bigint();
  const cpu = process.cpuUsage();
  const { result } = await computeLens(db, layer);
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  const used = process.cpuUsage(cpu);
  console.log(JSON.stringify({
    seconds, cpuSeconds: (used.user + used.system) / 1e6, effectiveDimensions: result.effectiveDimensions,
    auroc: result.concepts.map((c) => c.auroc), curves: result.concepts.map((c) => c.curve.length), probesFitted: result.probesFitted,
    peakRssKb: process.resourceUsage().maxRSS,
  }));
} finally {
  db.close();
}
