/**
 * The lens against general-purpose reference libraries on the demo's layers (Debian /usr/bin/python3):
 * - the held-out AUROC of each concept's logistic probe matches sklearn's LogisticRegression fitted on the same
 *   folds, the same standardised units and the same penalty, scored by sklearn.metrics.roc_auc_score;
 * - the participation ratio matches (Σλ)²/Σλ² from numpy.linalg.eigvalsh of numpy.cov.
 */
import { execFileSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { createApi, runScan } from '../../core/api/index.ts';
import { writeNpyFloat32 } from '../../core/probes/index.ts';
import { computeLens, defaultLensOptions, foldsOf, type LensResult } from '../../core/geometry/index.ts';
import { openStudyDb } from '../../core/store/study.ts';
import { readBinding as readRun } from '../../core/store/binding.ts';
import { readLabelMatrix } from '../../core/score/job.ts';
import { demoPaths } from '../../core/cli/main.ts';
import { tempDir } from '../support/fixtures.ts';

const PYTHON = '/usr/bin/python3';
const haveSklearn = (() => {
  try { execFileSync(PYTHON, ['-c', 'import numpy, sklearn'], { stdio: 'ignore' }); return true; } catch { return false; }
})();
if (!haveSklearn) console.warn('SKIPPED: /usr/bin/python3 with numpy and sklearn is missing (apt-get install python3-sklearn) — the lens reference checks do not run');

describe.skipIf(!haveSklearn)('lens against numpy and sklearn on the demo', () => {
  let dir: string;
  let study: string;
  beforeAll(async () => {
    dir = tempDir('skein-lens-ref-');
    study = path.join(dir, 'demo.study');
    await runScan({ ...demoPaths, study, layers: ['relu_narrow', 'relu_wide'] });
  }, 120_000);

  for (const layer of ['relu_narrow', 'relu_wide']) {
    it(`${layer}: probe AUROC as sklearn's, participation ratio as numpy's`, async () => {
      const db = openStudyDb(study);
      let result: LensResult;
      let targets: Float32Array;
      let folds: Float32Array;
      let labelCount: number;
      try {
        result = (await computeLens(db, layer)).result;
        const run = readRun(db)!;
        const labels = readLabelMatrix(db, run);
        labelCount = labels.labels.length;
        targets = new Float32Array(labelCount * run.probeCount);
        for (let p = 0; p < run.probeCount; p++) for (let k = labels.labelOffsets[p]; k < labels.labelOffsets[p + 1]; k++) targets[labels.labelIds[k] * run.probeCount + p] = 1;
        folds = Float32Array.from(foldsOf(run.probeCount, defaultLensOptions.folds, defaultLensOptions.seed));
      } finally {
        db.close();
      }
      const acts = path.join(dir, `${layer}.npy`);
      await createApi()['export.activations']({ study, out: acts, layer });
      writeNpyFloat32(path.join(dir, 'targets.npy'), [labelCount, folds.length], targets);
      writeNpyFloat32(path.join(dir, 'folds.npy'), [folds.length], folds);
      const ref = JSON.parse(execFileSync(PYTHON, [path.join(import.meta.dirname, 'reference.py'), acts, path.join(dir, 'targets.npy'), path.join(dir, 'folds.npy'), String(defaultLensOptions.l2)], { encoding: 'utf8' }));
      // float32 cross products, float64 sums: agreement to a relative 1e-6.
      expect(Math.abs(result.effectiveDimensions / ref.participation_ratio - 1)).toBeLessThan(1e-6);
      const worst = Math.max(...result.concepts.map((c, t) => Math.abs(c.auroc! - ref.auroc[t])));
      console.log(`${layer}: participation ratio ${result.effectiveDimensions} vs numpy ${ref.participation_ratio}; largest AUROC difference from sklearn ${worst.toExponential(2)}`);
      result.concepts.forEach((c, t) => {
        expect(c.auroc).not.toBeNull();
        expect(Math.abs(c.auroc! - ref.auroc[t])).toBeLessThan(1e-3);
      });
      fs.rmSync(acts);
    }, 300_000);
  }
});
