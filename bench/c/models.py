#!/usr/bin/env python3
"""Train the two library models whose C sizes DEVELOPERS.md and the issue
tracker quote, into DIR:

  bc100.json   scikit-learn RandomForestClassifier(n_estimators=100,
               random_state=0) on the Breast Cancer Wisconsin (Diagnostic)
               data set as scikit-learn ships it (load_breast_cancer; Wolberg,
               Street and Mangasarian, UCI Machine Learning Repository, 1995)
  xgb500.json  XGBoost, 500 rounds of depth 6 (eta 0.1, binary:logistic,
               seed 1) on 20,000 invented rows x 20 float32 features (seeded
               normal noise; it stands for no real measurement)

Then: sawmill import DIR/xgb500.json -o DIR/xgb500s.json and
sawmill inspect --c-sizes DIR/MODEL.json for each.

Usage: .venv/bin/python bench/c/models.py DIR
"""
import os
import sys

import numpy as np
import xgboost as xgb
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "python"))
import sawmill_export  # noqa: E402


def main(out):
    X, y = load_breast_cancer(return_X_y=True)
    rf = RandomForestClassifier(n_estimators=100, random_state=0).fit(X, y)
    sawmill_export.save(rf, os.path.join(out, "bc100.json"), feature_names=[f"f{i}" for i in range(X.shape[1])])
    rng = np.random.default_rng(1)
    xs = rng.normal(size=(20000, 20)).astype(np.float32)
    ys = (xs[:, 0] + xs[:, 1] * xs[:, 2] + np.sin(xs[:, 3]) + rng.normal(scale=0.5, size=20000) > 0).astype(int)
    params = {"max_depth": 6, "eta": 0.1, "objective": "binary:logistic", "seed": 1}
    xgb.train(params, xgb.DMatrix(xs, label=ys), 500).save_model(os.path.join(out, "xgb500.json"))


if __name__ == "__main__":
    main(sys.argv[1])
