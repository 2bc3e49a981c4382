/**
 * The superposition lens at scale against the numpy/sklearn notebook computing the same things, side by side in one
 * run: a synthetic layer of `units` units over `probes` probes and `labels` labels; the lens (core/geometry, in a
 * child process whose peak RSS is reported) vs bench/lens_reference.py on the same activations, labels and folds
 * (covariance + eigendecomposition, the cross-validated probes, the sparse probes). The notebook's time excludes
 * loading its .npy files; the lens's includes reading the study.
 */
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { createApi } from '../../core/api/index.ts';
import { writeNpyFloat32 } from '../../core/probes/index.ts';
import { defaultLensOptions, foldsOf } from '../../core/geometry/index.ts';
import { buildStudy, removeStudy } from '../lib/study.ts';
import { benchDir, runChild } from '../lib/measure.ts';
import type { SyntheticSpec } from '../lib/synthetic.ts';

export interface LensFigure {
  spec: SyntheticSpec;
  lensSeconds: number; lensCpuSeconds: number; peakRssMb: number; probesFitted: number;
  referenceSeconds: number; referenceCpuSeconds: number; referenceCovarianceSeconds: number;
  ratio: number;
  prDifference: number; largestAurocDifference: number;
}

export async function lensFigure(dir: string, spec: SyntheticSpec, log: (s: string) => void): Promise<LensFigure> {
  fs.mkdirSync(dir, { recursive: true });
  const study = path.join(dir, 'lens.study');
  const built = buildStudy(study, spec);
  log(`  built ${spec.probes} × ${spec.units} × ${spec.labels} study in ${built.seconds.toFixed(1)} s`);
  try {
    const child = await runChild<{ seconds: number; cpuSeconds: number; effectiveDimensions: number; auroc: (number | null)[]; probesFitted: number }>('lens.ts', [study, 'synthetic']);
    log(`  lens: ${child.value.seconds.toFixed(1)} s (CPU ${child.value.cpuSeconds.toFixed(1)} s), peak RSS ${child.peakRssMb.toFixed(0)} MiB`);
    const acts = path.join(dir, 'acts.npy');
    await createApi()['export.activations']({ study, out: acts, layer: 'synthetic' });
    const { SyntheticActivations } = await import('../lib/synthetic.ts');
    const labels = new SyntheticActivations(spec).labels;
    const targets = new Float32Array(spec.labels * spec.probes);
    for (let p = 0; p < spec.probes; p++) for (let k = labels.labelOffsets[p]; k < labels.labelOffsets[p + 1]; k++) targets[labels.labelIds[k] * spec.probes + p] = 1;
    writeNpyFloat32(path.join(dir, 'targets.npy'), [spec.labels, spec.probes], targets);
    writeNpyFloat32(path.join(dir, 'folds.npy'), [spec.probes], Float32Array.from(foldsOf(spec.probes, defaultLensOptions.folds, defaultLensOptions.seed)));
    const out = execFileSync('/usr/bin/python3', [path.join(benchDir, 'lens_reference.py'), acts, path.join(dir, 'targets.npy'), path.join(dir, 'folds.npy'), String(defaultLensOptions.l2)], { encoding: 'utf8', maxBuffer: 1 << 24 });
    const ref = JSON.parse(out.trim().split('\n').pop()!) as { seconds: number; cpu_seconds: number; covariance_seconds: number; participation_ratio: number; auroc: number[] };
    log(`  numpy/sklearn: ${ref.seconds.toFixed(1)} s (CPU ${ref.cpu_seconds.toFixed(1)} s; covariance + eigen ${ref.covariance_seconds.toFixed(1)} s)`);
    fs.rmSync(acts);
    const diffs = child.value.auroc.map((a, i) => Math.abs((a ?? 0.5) - ref.auroc[i]));
    return {
      spec, lensSeconds: child.value.seconds, lensCpuSeconds: child.value.cpuSeconds, peakRssMb: child.peakRssMb, probesFitted: child.value.probesFitted,
      referenceSeconds: ref.seconds, referenceCpuSeconds: ref.cpu_seconds, referenceCovarianceSeconds: ref.covariance_seconds,
      ratio: ref.seconds / child.value.seconds,
      prDifference: Math.abs(child.value.effectiveDimensions / ref.participation_ratio - 1), largestAurocDifference: Math.max(...diffs),
    };
  } finally {
    removeStudy(study);
  }
}
