#!/usr/bin/env python3
"""Write the LightGBM reference fixtures under source/testdata/lightgbm/.

Run it by hand from the repository with a Python that has the packages pinned
in python/requirements.txt (lightgbm 4.7.0, scikit-learn 1.9.1, numpy):

    python scripts/lightgbm_fixtures.py

Tests never run this script; they read the committed files. Running it twice
gives the same files (fixed seeds, deterministic=True, one thread).

Datasets, all shipped inside scikit-learn (no download); citations as the
datasets' DESCR text in scikit-learn gives them:

- Breast Cancer Wisconsin (Diagnostic): W.N. Street, W.H. Wolberg and
  O.L. Mangasarian, Nuclear feature extraction for breast tumor diagnosis
  (1993); UCI Machine Learning Repository (sklearn.datasets.load_breast_cancer).
- Wine: Forina, M. et al., PARVUS - An Extendible Package for Data
  Exploration, Classification and Correlation; UCI Machine Learning
  Repository (sklearn.datasets.load_wine).
- Diabetes: B. Efron, T. Hastie, I. Johnstone and R. Tibshirani, Least Angle
  Regression, Annals of Statistics 32(2) (2004) 407-499
  (sklearn.datasets.load_diabetes).

A few cells of every dataset are made NaN and a few exactly 0, and one column
is turned into integer categories (its rank in 12 quantile bins) where a model
has a categorical feature, so that every decision_type bit is exercised.

For each model, in source/testdata/lightgbm/<name>/:

- model.txt     the model as Booster.save_model writes it
- rows.csv      the features (header = the model's feature names): held-out
                rows, then probe rows that put one feature at, just below and
                just above every threshold the model uses (in float64 and
                float32), at every category edge (negative, fractional,
                unseen, huge, NaN) and at zero, the zero threshold and NaN
- expected.csv  LightGBM's predict(raw_score=True) as raw_0..raw_{K-1}, then
                predict() as out_0..out_{K-1}, one line per row of rows.csv;
                every number in Python's repr (exact round trip)
- meta.json     dataset, parameters, the iterations predicted with (0 = all),
                and for a model sawmill must refuse, the error expected
"""

import json
import os
import shutil
import sys

import lightgbm as lgb
import numpy as np
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "source", "testdata", "lightgbm")

# kZeroThreshold of LightGBM (include/LightGBM/meta.h: 1e-35f), widened.
ZERO = float(np.float32(1e-35))

COMMON = dict(verbose=-1, num_threads=1, deterministic=True, seed=7, min_data_in_leaf=5, num_leaves=6)


def dataset(name, categorical):
    """Features (a few columns), labels, and the index of the categorical column or None."""
    if name == "breast_cancer":
        d = load_breast_cancer()
        X, y = d.data[:, :8].copy(), d.target.astype(float)
    elif name == "wine":
        d = load_wine()
        X, y = d.data[:, :8].copy(), d.target.astype(float)
    elif name == "diabetes":
        d = load_diabetes()
        X, y = d.data.copy(), d.target.astype(float)
    else:
        raise ValueError(name)
    # Four significant digits keep the committed rows small; the models are
    # trained on these values.
    X = np.vectorize(lambda v: float(f"{v:.4g}"))(X)
    rng = np.random.default_rng(20240601)
    cat = None
    if categorical:
        # a column that predicts well, so the trees split on it
        cat = {"breast_cancer": 7, "wine": 0, "diabetes": 2}[name]
        col = X[:, cat]
        edges = np.quantile(col, np.linspace(0, 1, 13)[1:-1])
        X[:, cat] = np.searchsorted(edges, col).astype(float)
    nan = rng.random(X.shape) < 0.06
    zero = rng.random(X.shape) < 0.05
    X[zero] = 0.0
    X[nan] = np.nan
    perm = rng.permutation(len(y))
    return X[perm], y[perm], cat


def nudge(t):
    """Values at and around a threshold t, in float64 and float32."""
    out = [t, np.nextafter(t, -np.inf), np.nextafter(t, np.inf)]
    f = np.float32(t)
    out += [float(np.nextafter(f, np.float32(-np.inf))), float(np.nextafter(f, np.float32(np.inf))), float(f)]
    return list(dict.fromkeys(out))


def walk(node, numeric, cats):
    if "split_feature" not in node:
        return
    f = node["split_feature"]
    if node["decision_type"] == "==":
        cats.setdefault(f, set()).update(int(c) for c in str(node["threshold"]).split("||"))
    else:
        numeric.setdefault(f, set()).add(float(node["threshold"]))
    walk(node["left_child"], numeric, cats)
    walk(node["right_child"], numeric, cats)


def probe_rows(booster, base):
    """Rows that put one feature at every edge the model tests."""
    numeric, cats = {}, {}
    for t in booster.dump_model()["tree_info"]:
        walk(t["tree_structure"], numeric, cats)
    rows = []
    k = 0

    def put(f, v):
        nonlocal k
        r = base[k % len(base)].copy()
        k += 1
        r[f] = v
        rows.append(r)

    for f in sorted(numeric):
        for t in sorted(numeric[f]):
            for v in nudge(t):
                put(f, v)
    for f in sorted(cats):
        top = max(cats[f])
        for v in [-1.0, -0.99, -0.5, -0.0, 0.5, 0.99, top + 1.0, top + 33.0, 1e10, 2.0**31 - 1, 2.0**31, 2.0**32 + 3, np.inf, -np.inf, np.nan]:
            put(f, v)
        for c in range(top + 1):
            for v in [c, c + 0.5, c - 0.5]:
                put(f, v)
    for f in sorted(set(numeric) | set(cats)):
        for v in [np.nan, 0.0, -0.0, 1e-36, -1e-36, ZERO, -ZERO, np.nextafter(ZERO, 1), np.nextafter(-ZERO, -1), np.inf, -np.inf]:
            put(f, v)
    return np.array(rows)


def num(v):
    v = float(v)
    if np.isnan(v):
        return ""
    return repr(v)


def write(out, name, booster, X_test, meta, iterations=0):
    d = os.path.join(out, name)
    os.makedirs(d, exist_ok=True)
    booster.save_model(os.path.join(d, "model.txt"), num_iteration=-1)
    rows = np.vstack([X_test, probe_rows(booster, X_test)])
    it = iterations if iterations > 0 else None
    raw = np.asarray(booster.predict(rows, raw_score=True, num_iteration=it), dtype=float).reshape(len(rows), -1)
    out = np.asarray(booster.predict(rows, num_iteration=it), dtype=float).reshape(len(rows), -1)
    names = booster.feature_name()
    with open(os.path.join(d, "rows.csv"), "w") as fh:
        fh.write(",".join(names) + "\n")
        for r in rows:
            fh.write(",".join(num(v) for v in r) + "\n")
    with open(os.path.join(d, "expected.csv"), "w") as fh:
        fh.write(",".join([f"raw_{i}" for i in range(raw.shape[1])] + [f"out_{i}" for i in range(out.shape[1])]) + "\n")
        for a, b in zip(raw, out):
            fh.write(",".join(num(v) for v in list(a) + list(b)) + "\n")
    meta = dict(meta, iterations=iterations, lightgbm=lgb.__version__)
    with open(os.path.join(d, "meta.json"), "w") as fh:
        json.dump(meta, fh, indent=1, sort_keys=True)
        fh.write("\n")


def train(data, params, rounds, categorical=False, ranking=False, labels=None, valid=False, seed=7):
    X, y, cat = dataset(data, categorical)
    if labels is not None:
        y = labels(y)
    n = len(y)
    cut = n - 15
    kw = {}
    if cat is not None:
        kw["categorical_feature"] = [cat]
    p = dict(COMMON, seed=seed, **params)
    if ranking:
        kw["group"] = [20] * (cut // 20) + ([cut % 20] if cut % 20 else [])
    ds = lgb.Dataset(X[:cut], y[:cut], params={"verbose": -1, "linear_tree": p.get("linear_tree", False)}, **kw)
    cb, vs = [], []
    if valid:
        vs = [lgb.Dataset(X[cut:], y[cut:], reference=ds)]
        cb = [lgb.early_stopping(3, verbose=False)]
    # keep_training_booster keeps every round trained (by default train()
    # reloads the booster from a string holding the best iteration only).
    b = lgb.train(p, ds, num_boost_round=rounds, valid_sets=vs, callbacks=cb, keep_training_booster=valid)
    meta = dict(dataset=data, params={k: v for k, v in params.items()}, rounds=rounds, categorical=cat is not None)
    return b, X[cut:], meta


def relevance(y):
    return np.searchsorted(np.quantile(y, [0.25, 0.5, 0.75]), y).astype(float)


MODELS = [
    # name, dataset, params, rounds, options
    ("binary", "breast_cancer", dict(objective="binary"), 5, {}),
    ("binary-sigmoid-none", "breast_cancer", dict(objective="binary", sigmoid=0.6, use_missing=False), 6, {}),
    ("binary-zero-missing", "breast_cancer", dict(objective="binary", zero_as_missing=True), 6, {}),
    ("binary-categorical", "breast_cancer", dict(objective="binary", max_cat_to_onehot=2, cat_smooth=1, min_data_per_group=5, cat_l2=1), 6, dict(categorical=True)),
    ("binary-onehot-categorical", "breast_cancer", dict(objective="binary", max_cat_to_onehot=16, min_data_per_group=5), 4, dict(categorical=True)),
    ("binary-rf", "breast_cancer", dict(objective="binary", boosting="rf", bagging_fraction=0.7, bagging_freq=1), 5, {}),
    ("binary-early-stopping", "breast_cancer", dict(objective="binary", learning_rate=0.4), 40, dict(valid=True)),
    ("cross-entropy", "breast_cancer", dict(objective="cross_entropy"), 5, {}),
    ("cross-entropy-lambda", "breast_cancer", dict(objective="cross_entropy_lambda"), 5, {}),
    ("multiclass", "wine", dict(objective="multiclass", num_class=3, max_cat_to_onehot=2, cat_smooth=1, min_data_per_group=5), 3, dict(categorical=True)),
    ("multiclassova", "wine", dict(objective="multiclassova", num_class=3, sigmoid=1.5), 3, {}),
    ("multiclass-rf", "wine", dict(objective="multiclass", num_class=3, boosting="rf", bagging_fraction=0.7, bagging_freq=1), 2, {}),
    ("regression", "diabetes", dict(objective="regression"), 6, {}),
    ("regression-zero-missing", "diabetes", dict(objective="regression", zero_as_missing=True), 5, dict(categorical=True)),
    ("regression-l1", "diabetes", dict(objective="regression_l1"), 4, {}),
    ("huber", "diabetes", dict(objective="huber", alpha=20.0), 4, {}),
    ("fair", "diabetes", dict(objective="fair"), 4, {}),
    ("quantile", "diabetes", dict(objective="quantile", alpha=0.8), 4, {}),
    ("mape", "diabetes", dict(objective="mape"), 4, {}),
    ("poisson", "diabetes", dict(objective="poisson"), 5, {}),
    ("gamma", "diabetes", dict(objective="gamma"), 5, {}),
    ("tweedie", "diabetes", dict(objective="tweedie", tweedie_variance_power=1.3), 5, {}),
    ("reg-sqrt", "diabetes", dict(objective="regression", reg_sqrt=True), 4, {}),
    ("lambdarank", "diabetes", dict(objective="lambdarank"), 4, dict(ranking=True, labels=relevance)),
    ("rank-xendcg", "diabetes", dict(objective="rank_xendcg"), 4, dict(ranking=True, labels=relevance)),
    ("linear-tree", "diabetes", dict(objective="regression", linear_tree=True), 2, dict(error="linear")),
]


def build(out, seed=7, quiet=False):
    """Train every model of MODELS and write its folder under out."""
    if os.path.isdir(out):
        shutil.rmtree(out)
    for name, data, params, rounds, opt in MODELS:
        opt = dict(opt)
        error = opt.pop("error", None)
        b, X_test, meta = train(data, params, rounds, seed=seed, **opt)
        iterations = 0
        if opt.get("valid"):
            # The file holds every round trained; LightGBM's own default is
            # the best iteration, which the file does not record: the test
            # passes it as Options.Iterations.
            iterations = b.best_iteration
            meta["best_iteration"] = b.best_iteration
            meta["trained_iterations"] = b.current_iteration()
        if error:
            meta["error"] = error
        write(out, name, b, X_test, meta, iterations)
        if not quiet:
            print(name, b.num_trees(), "trees")


def main():
    if lgb.__version__ != "4.7.0":
        print(f"warning: fixtures were made with lightgbm 4.7.0, this is {lgb.__version__}", file=sys.stderr)
    build(OUT)


if __name__ == "__main__":
    main()
