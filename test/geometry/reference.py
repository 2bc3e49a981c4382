"""Reference figures for test/geometry/reference.test.ts, from general-purpose libraries (Debian python3-numpy,
python3-sklearn): the cross-validated logistic-probe AUROC on the given folds, and the participation ratio from
numpy's eigendecomposition of the covariance.

usage: reference.py acts.npy targets.npy folds.npy l2  → JSON on stdout
"""
import json
import sys

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score

acts = np.load(sys.argv[1]).astype(np.float64)        # [N, units]
targets = np.load(sys.argv[2]).astype(np.int64)       # [concepts, N], 0/1
folds = np.load(sys.argv[3]).astype(np.int64)         # [N], fold of each probe
l2 = float(sys.argv[4])

cov = np.cov(acts, rowvar=False)                      # sample covariance, N - 1
eig = np.linalg.eigvalsh(cov)
pr = float(eig.sum() ** 2 / (eig ** 2).sum())

mean = acts.mean(axis=0)
std = np.sqrt(np.diag(cov))
z = np.where(std > 0, (acts - mean) / np.where(std > 0, std, 1), 0.0)

aurocs = []
for y in targets:
    scores = np.zeros(len(y))
    for f in range(folds.max() + 1):
        train = folds != f
        # sklearn minimises C·Σ log-loss + ½‖w‖², the lens (1/n)·Σ log-loss + (λ/2)‖w‖²: C = 1 / (λ n).
        model = LogisticRegression(C=1.0 / (l2 * train.sum()), tol=1e-10, max_iter=100000)
        model.fit(z[train], y[train])
        scores[~train] = model.decision_function(z[~train])
    aurocs.append(float(roc_auc_score(y, scores)))

print(json.dumps({"participation_ratio": pr, "auroc": aurocs}))
