"""The numpy/sklearn notebook the lens is compared with (bench figure 'lens'): on the same activations, labels and
folds, the covariance and its eigendecomposition (participation ratio), one LogisticRegression per label and fold
(the lens's penalty: C = 1 / (λ · n_train)) scored by the pooled out-of-fold AUROC, and the same sparse probes
(each carried label's best k = 1, 2, 4, … units by |standardised mean difference|). Prints its own timings as JSON;
loading the .npy files is not timed.

usage: lens_reference.py acts.npy targets.npy folds.npy l2
"""
import json
import sys
import time

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score

acts = np.load(sys.argv[1])
targets = np.load(sys.argv[2]).astype(np.int64)
folds = np.load(sys.argv[3]).astype(np.int64)
l2 = float(sys.argv[4])

start = time.perf_counter()
cpu = time.process_time()
cov = np.cov(acts, rowvar=False)
eig = np.linalg.eigvalsh(cov)
pr = float(eig.sum() ** 2 / (eig ** 2).sum())
t_cov = time.perf_counter() - start

mean = acts.mean(axis=0)
std = np.sqrt(np.diag(cov))
z = np.where(std > 0, (acts - mean) / np.where(std > 0, std, 1), 0.0).astype(np.float32)


def cv_auroc(x, y):
    scores = np.zeros(len(y))
    for f in range(folds.max() + 1):
        train = folds != f
        model = LogisticRegression(C=1.0 / (l2 * train.sum()), max_iter=1000)
        model.fit(x[train], y[train])
        scores[~train] = model.decision_function(x[~train])
    return float(roc_auc_score(y, scores))


aurocs = [cv_auroc(z, y) for y in targets]
t_full = time.perf_counter() - start - t_cov
width = acts.shape[1]
ks = []
k = 1
while k < width:
    ks.append(k)
    k *= 2
for y, a in zip(targets, aurocs):
    if a < 0.75:
        continue
    diff = np.abs(z[y == 1].mean(axis=0) - z[y == 0].mean(axis=0))
    order = np.argsort(-diff, kind="stable")
    for k in ks:
        cv_auroc(z[:, order[:k]], y)
seconds = time.perf_counter() - start
print(json.dumps({"seconds": seconds, "cpu_seconds": time.process_time() - cpu, "covariance_seconds": t_cov,
                  "full_probe_seconds": t_full, "participation_ratio": pr, "auroc": aurocs}))
