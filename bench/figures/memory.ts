/**
 * Memory and scale of the scoring job: studies built directly with the store's schema, scored by
 * core/score/job.ts scoreStudy in a child process whose peak resident memory is what we report.
 */
import path from 'node:path';
import { buildStudy, removeStudy } from '../lib/study.ts';
import { median, runChild } from '../lib/measure.ts';
import type { SyntheticSpec } from '../lib/synthetic.ts';

export interface JobPoint {
  spec: SyntheticSpec;
  activationBytes: number;
  studyBytes: number;
  buildSeconds: number;
  /** Median over the runs. */
  scoreSeconds: number;
  runs: number[];
  /** Largest over the runs. */
  peakRssMb: number;
  /** RSS of the child after loading the code and opening the study, before scoring. */
  baselineRssMb: number;
}

interface ScoreChildResult { seconds: number; units: number; baselineRssKb: number }

export async function scoreJobPoint(dir: string, spec: SyntheticSpec, log: (s: string) => void, reps = 1): Promise<JobPoint> {
  const file = path.join(dir, `score-${spec.probes}x${spec.units}x${spec.labels}.study`);
  const built = buildStudy(file, spec);
  log(`  built ${spec.probes} × ${spec.units} × ${spec.labels}: ${(built.activationBytes / 1e9).toFixed(2)} GB of float32 in ${built.seconds.toFixed(1)} s`);
  try {
    const runs: number[] = [];
    let peakRssMb = 0;
    let baselineRssMb = 0;
    for (let rep = 0; rep < reps; rep++) {
      const child = await runChild<ScoreChildResult>('score.ts', [file]);
      log(`  scored in ${child.value.seconds.toFixed(1)} s, peak RSS ${child.peakRssMb.toFixed(0)} MiB`);
      runs.push(child.value.seconds);
      peakRssMb = Math.max(peakRssMb, child.peakRssMb);
      baselineRssMb = child.value.baselineRssKb / 1024;
    }
    return {
      spec, activationBytes: built.activationBytes, studyBytes: built.fileBytes, buildSeconds: built.seconds,
      scoreSeconds: median(runs), runs, peakRssMb, baselineRssMb,
    };
  } finally {
    removeStudy(file);
  }
}

export type Axis = 'probes' | 'units' | 'labels';

export interface AxisResult {
  axis: Axis;
  points: JobPoint[];
  timeSlope: number;
  memorySlope: number;
  timeGrowth: string;
  memoryGrowth: string;
  /** Least-squares line through the times: seconds ≈ fixedSeconds + secondsPerStep · size. */
  fixedSeconds: number;
  secondsPerStep: number;
  /** The same for peak RSS: MiB ≈ fixedMb + mbPerStep · size. */
  fixedMb: number;
  mbPerStep: number;
}

/** Ordinary least squares y ≈ a + b·x. */
export function linearFit(xs: number[], ys: number[]): { a: number; b: number } {
  const mx = xs.reduce((s, x) => s + x, 0) / xs.length;
  const my = ys.reduce((s, y) => s + y, 0) / ys.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < xs.length; i++) {
    num += (xs[i] - mx) * (ys[i] - my);
    den += (xs[i] - mx) ** 2;
  }
  const b = num / den;
  return { a: my - b * mx, b };
}

/** Least-squares slope of log y on log x: y ∝ x^slope. */
export function logLogSlope(xs: number[], ys: number[]): number {
  const lx = xs.map(Math.log);
  const ly = ys.map((y) => Math.log(Math.max(y, 1e-9)));
  const mx = lx.reduce((a, b) => a + b, 0) / lx.length;
  const my = ly.reduce((a, b) => a + b, 0) / ly.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < lx.length; i++) {
    num += (lx[i] - mx) * (ly[i] - my);
    den += (lx[i] - mx) ** 2;
  }
  return num / den;
}

export function growthWords(slope: number): string {
  if (slope < 0.2) return 'flat (does not grow)';
  if (slope < 0.8) return 'sublinear';
  if (slope <= 1.2) return 'linear';
  if (slope <= 1.6) return 'superlinear (N log N or worse)';
  if (slope <= 2.3) return 'quadratic';
  return 'worse than quadratic';
}

export function axisSpec(base: SyntheticSpec, axis: Axis, size: number): SyntheticSpec {
  return { ...base, [axis]: size };
}

export async function scaleAxis(dir: string, base: SyntheticSpec, axis: Axis, sizes: number[], cache: Map<string, JobPoint>, log: (s: string) => void): Promise<AxisResult> {
  const points: JobPoint[] = [];
  for (const size of sizes) {
    const spec = axisSpec(base, axis, size);
    const key = `${spec.probes}x${spec.units}x${spec.labels}`;
    let point = cache.get(key);
    if (!point) {
      point = await scoreJobPoint(dir, spec, log);
      cache.set(key, point);
    }
    points.push(point);
  }
  const timeSlope = logLogSlope(sizes, points.map((p) => p.scoreSeconds));
  // the whole peak: a floor (runtime, SQLite, WordNet) plus what grows; the line below separates the two
  const memorySlope = logLogSlope(sizes, points.map((p) => p.peakRssMb));
  const line = linearFit(sizes, points.map((p) => p.scoreSeconds));
  const memoryLine = linearFit(sizes, points.map((p) => p.peakRssMb));
  return {
    axis, points, timeSlope, memorySlope, timeGrowth: growthWords(timeSlope), memoryGrowth: growthWords(memorySlope),
    fixedSeconds: line.a, secondsPerStep: line.b, fixedMb: memoryLine.a, mbPerStep: memoryLine.b,
  };
}
