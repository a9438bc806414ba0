#!/usr/bin/python3
"""Write the XGBoost reference fixtures under source/testdata/xgboost/.

Runs under any Python with xgboost, scikit-learn and numpy. The committed
fixtures come from two of them (the Go tests read both sets):

    /usr/bin/python3 scripts/xgboost_fixtures.py          # Debian's xgboost 1.7.4 -> x17_*
    .venv/bin/python scripts/xgboost_fixtures.py           # xgboost-cpu 3.2.0 (python/requirements.txt) -> x3_*

and, for the 2.x file layout, a subset (see SUBSET_2X) made with
xgboost-cpu 2.1.4 installed beside the venv's packages:

    .venv/bin/pip install --no-deps --target /tmp/x2 xgboost-cpu==2.1.4
    PYTHONPATH=/tmp/x2 .venv/bin/python scripts/xgboost_fixtures.py   # -> x2_*

With an output folder argument it writes there instead (the live check in
scripts/xgboost_live_check.py uses that). Tests never run this script.

Datasets, all shipped inside scikit-learn (no download):

- Breast Cancer Wisconsin (Diagnostic): W.N. Street, W.H. Wolberg and
  O.L. Mangasarian, Nuclear feature extraction for breast tumor diagnosis
  (1993); UCI Machine Learning Repository (sklearn.datasets.load_breast_cancer).
- Wine: Forina, M. et al., PARVUS - An Extendible Package for Data
  Exploration, Classification and Correlation; UCI Machine Learning
  Repository (sklearn.datasets.load_wine).
- Diabetes: B. Efron, T. Hastie, I. Johnstone and R. Tibshirani, Least Angle
  Regression, Annals of Statistics 32(2), 2004 (sklearn.datasets.load_diabetes,
  scaled=False).

In each folder <prefix>_<name>/:

- model.json, model.ubj   the booster as XGBoost saves it (JSON, and UBJSON
                          for the cases in UBJ_CASES, to keep the files small)
- rows.csv                the features: held-out rows (some cells NaN), then
                          probe rows putting one split's feature at, just
                          below and just above its threshold in float32 and
                          float64, and category probes (negative, fractional,
                          unseen, huge)
- margins.csv             predict(output_margin=True), one column per output
- predictions.csv         predict(), one column per output
- meta.json               objective, xgboost version, rounds used, notes

Every float is written as Python's repr, the shortest text that reads back
to the same double, so the files are exact.
"""

import json
import math
import os
import shutil
import struct
import sys

import numpy as np
import xgboost as xgb
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine

VERSION = tuple(int(p) for p in xgb.__version__.split(".")[:2])
PREFIX = "x%d" % VERSION[0] if VERSION[0] >= 2 else "x%d%d" % VERSION
ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "source", "testdata", "xgboost")

SEED = 20240611
ROUNDS = 4
DEPTH = 3
HELD_OUT = 24  # held-out rows per model
PROBED_SPLITS = 10  # numeric splits probed per model (7 rows each)
NAN_SHARE = 0.08  # share of cells set to NaN


def f32(x):
    return struct.unpack("<f", struct.pack("<f", x))[0]


def next32(x, up):
    """The float32 next to float32 x, towards +inf when up."""
    b = struct.unpack("<i", struct.pack("<f", x))[0]
    if x == 0:
        return struct.unpack("<f", struct.pack("<i", 1 if up else -2147483647))[0]
    if (x > 0) == up:
        b += 1
    else:
        b -= 1
    return struct.unpack("<f", struct.pack("<i", b))[0]


def fmt(v):
    v = float(v)
    if math.isnan(v):
        return ""
    return repr(v)


def split(X, y, rng):
    idx = rng.permutation(len(X))
    test, train = idx[:HELD_OUT], idx[HELD_OUT:]
    return X[train], y[train], X[test], y[test]


def with_nans(X, rng):
    X = X.copy()
    X[rng.random(X.shape) < NAN_SHARE] = np.nan
    return X


def cancer(rng):
    d = load_breast_cancer()
    X = d.data[:, :10]  # the ten "mean" features keep the fixtures small
    return with_nans(X, rng), d.target.astype(float), list(d.feature_names[:10])


def wine(rng):
    d = load_wine()
    return with_nans(d.data, rng), d.target.astype(float), list(d.feature_names)


def diabetes(rng):
    d = load_diabetes(scaled=False)
    return with_nans(d.data, rng), d.target.astype(float), list(d.feature_names)


def diabetes_cat(rng):
    """Diabetes with a categorical column: bmi's decile (0..9), an integer code."""
    X, y, names = diabetes(rng)
    bmi = X[:, 2]
    edges = np.nanquantile(bmi, np.linspace(0.1, 0.9, 9))
    cat = np.where(np.isnan(bmi), np.nan, np.searchsorted(edges, bmi).astype(float))
    X = np.column_stack([X, cat])
    return X, y, names + ["bmi_decile"]


def probes(model_json, Xtest, cat_features, rng):
    """Rows at, just below and just above numeric thresholds (float32 and
    float64 neighbours), and category edge rows."""
    gb = model_json["learner"]["gradient_booster"]
    trees = gb["gbtree"]["model"]["trees"] if "gbtree" in gb else gb["model"]["trees"]
    splits = set()
    for t in trees:
        types = t.get("split_type", [0] * len(t["left_children"]))
        for i, left in enumerate(t["left_children"]):
            if left != -1 and types[i] == 0:
                splits.add((t["split_indices"][i], t["split_conditions"][i]))
    splits = sorted(splits)
    if len(splits) > PROBED_SPLITS:
        pick = rng.choice(len(splits), PROBED_SPLITS, replace=False)
        splits = [splits[i] for i in sorted(pick)]
    base = np.nan_to_num(Xtest[0], nan=0.0)
    rows = []
    for feat, t in splits:
        t32 = f32(t)
        for v in (t32, next32(t32, False), next32(t32, True),
                  np.nextafter(t32, -np.inf), np.nextafter(t32, np.inf),
                  (t32 + next32(t32, False)) / 2, (t32 + next32(t32, True)) / 2):
            r = base.copy()
            r[feat] = v
            rows.append(r)
    for feat in cat_features:
        for b in Xtest[:4]:  # several rows, so that many categorical splits are reached
            for v in (-1.0, -0.5, -0.0, 0.5, 2.5, 2.999999, 9.0, 9.5, 10.0, 37.0, 1e6, 2.0**24, 2.0**31, 1e30):
                r = np.nan_to_num(b, nan=0.0)
                r[feat] = v
                rows.append(r)
    return np.array(rows) if rows else np.empty((0, Xtest.shape[1]))


def write_csv(path, header, rows):
    with open(path, "w") as fh:
        fh.write(",".join(header) + "\n")
        for r in rows:
            fh.write(",".join(fmt(v) for v in r) + "\n")


def cases():
    """name, data function, params, extra (rounds, early stopping, ranking)."""
    yield "binary_logistic", cancer, {"objective": "binary:logistic"}, {}
    yield "binary_logitraw", cancer, {"objective": "binary:logitraw"}, {}
    yield "binary_hinge", cancer, {"objective": "binary:hinge"}, {}
    yield "binary_logistic_base", cancer, {"objective": "binary:logistic", "base_score": 0.3}, {}
    yield "dart", cancer, {"objective": "binary:logistic", "booster": "dart", "rate_drop": 0.3, "skip_drop": 0.0}, {}
    yield "missing_sentinel", cancer, {"objective": "binary:logistic"}, {"missing": -999.0}
    yield "early_stop", cancer, {"objective": "binary:logistic", "eta": 0.6}, {"early_stopping": True}
    yield "parallel_tree", cancer, {"objective": "binary:logistic", "num_parallel_tree": 3, "subsample": 0.7, "colsample_bynode": 0.7}, {"rounds": 3}
    yield "multi_softprob", wine, {"objective": "multi:softprob", "num_class": 3}, {}
    yield "multi_softmax", wine, {"objective": "multi:softmax", "num_class": 3}, {}
    yield "reg_squarederror", diabetes, {"objective": "reg:squarederror"}, {}
    yield "reg_squaredlogerror", diabetes, {"objective": "reg:squaredlogerror"}, {}
    yield "reg_logistic", diabetes, {"objective": "reg:logistic"}, {"label": "unit"}
    yield "reg_pseudohubererror", diabetes, {"objective": "reg:pseudohubererror"}, {}
    yield "reg_absoluteerror", diabetes, {"objective": "reg:absoluteerror"}, {}
    yield "count_poisson", diabetes, {"objective": "count:poisson"}, {"label": "count"}
    yield "reg_gamma", diabetes, {"objective": "reg:gamma"}, {}
    yield "reg_tweedie", diabetes, {"objective": "reg:tweedie", "tweedie_variance_power": 1.5}, {}
    yield "survival_cox", diabetes, {"objective": "survival:cox"}, {"label": "cox"}
    yield "rank_pairwise", diabetes, {"objective": "rank:pairwise"}, {"label": "grade", "qid": True}
    yield "rank_ndcg", diabetes, {"objective": "rank:ndcg"}, {"label": "grade", "qid": True}
    yield "rank_map", diabetes, {"objective": "rank:map"}, {"label": "binary", "qid": True}
    yield "categorical", diabetes_cat, {"objective": "reg:squarederror", "tree_method": "hist", "max_cat_to_onehot": 1}, {"cat": True, "rounds": 8}
    yield "categorical_onehot", diabetes_cat, {"objective": "reg:squarederror", "tree_method": "hist", "max_cat_to_onehot": 16}, {"cat": True}
    if VERSION >= (2, 0):
        yield "reg_quantileerror", diabetes, {"objective": "reg:quantileerror", "quantile_alpha": [0.1, 0.5, 0.9]}, {}


def label(y, kind):
    if kind == "unit":
        return (y - y.min()) / (y.max() - y.min())
    if kind == "count":
        return np.floor(y / 25.0)
    if kind == "cox":  # every fifth survival time censored (negative)
        return np.where(np.arange(len(y)) % 5 == 0, -y, y)
    if kind == "grade":
        return np.minimum(np.floor(y / 70.0), 4.0)
    if kind == "binary":
        return (y > np.median(y)).astype(float)
    return y


def build(name, data, params, extra, out):
    rng = np.random.default_rng(SEED)
    X, y, names = data(rng)
    y = label(y, extra.get("label"))
    Xtr, ytr, Xte, yte = split(X, y, rng)
    ft = None
    cat_features = []
    if extra.get("cat"):
        ft = ["q"] * (X.shape[1] - 1) + ["c"]
        cat_features = [X.shape[1] - 1]
    kw = dict(feature_names=names)
    if "missing" in extra:  # missing cells marked by a sentinel, as XGBoost users do with missing=-999
        X = np.where(np.isnan(X), extra["missing"], X)
        Xtr = np.where(np.isnan(Xtr), extra["missing"], Xtr)
        Xte = np.where(np.isnan(Xte), extra["missing"], Xte)
        kw["missing"] = extra["missing"]
    if ft:
        kw.update(feature_types=ft, enable_categorical=True)
    dtrain = xgb.DMatrix(Xtr, label=ytr, **kw)
    if extra.get("qid"):
        dtrain.set_group([len(ytr) // 4] * 3 + [len(ytr) - 3 * (len(ytr) // 4)])
    p = {"max_depth": DEPTH, "eta": 0.3, "seed": 7, "nthread": 1}
    p.update(params)
    rounds = extra.get("rounds", ROUNDS)
    evals = ()
    es = None
    if extra.get("early_stopping"):
        rounds = 40
        es = 2
        evals = [(xgb.DMatrix(Xte, label=yte, **kw), "test")]
        p["eval_metric"] = "logloss"
    bst = xgb.train(p, dtrain, rounds, evals=evals, early_stopping_rounds=es, verbose_eval=False)
    folder = os.path.join(out, "%s_%s" % (PREFIX, name))
    os.makedirs(folder, exist_ok=True)
    bst.save_model(os.path.join(folder, "model.json"))
    if name in UBJ_CASES:
        bst.save_model(os.path.join(folder, "model.ubj"))
    with open(os.path.join(folder, "model.json")) as fh:
        # XGBoost writes a bare NaN at categorical splits (1.x); Python reads it
        mj = json.load(fh)
    rows = np.vstack([Xte, probes(mj, Xte, cat_features, rng)])
    dtest = xgb.DMatrix(rows, **kw)
    it = {}
    best = None
    if es is not None:
        best = int(bst.best_iteration)
        it = {"iteration_range": (0, best + 1)}
    margin = np.asarray(bst.predict(dtest, output_margin=True, **it), dtype=np.float64)
    pred = np.asarray(bst.predict(dtest, **it), dtype=np.float64)
    if margin.ndim == 1:
        margin = margin[:, None]
    if pred.ndim == 1:
        pred = pred[:, None]
    write_csv(os.path.join(folder, "rows.csv"), names, rows)
    write_csv(os.path.join(folder, "margins.csv"), ["margin%d" % k for k in range(margin.shape[1])], margin)
    write_csv(os.path.join(folder, "predictions.csv"), ["prediction%d" % k for k in range(pred.shape[1])], pred)
    meta = {
        "xgboost": xgb.__version__,
        "objective": p["objective"],
        "booster": p.get("booster", "gbtree"),
        "best_iteration": best,
        "missing": extra.get("missing"),
        "params": {k: v for k, v in sorted(p.items()) if k not in ("nthread",)},
    }
    with open(os.path.join(folder, "meta.json"), "w") as fh:
        json.dump(meta, fh, indent=1, sort_keys=True)
        fh.write("\n")


def refused(out):
    """Models sawmill must refuse with a clear error: gblinear, and (2.0+)
    vector-leaf multi-target trees."""
    rng = np.random.default_rng(SEED)
    X, y, names = diabetes(rng)
    d = xgb.DMatrix(X, label=y, feature_names=names)
    lin = xgb.train({"booster": "gblinear", "nthread": 1}, d, 2)
    folder = os.path.join(out, "%s_refuse_gblinear" % PREFIX)
    os.makedirs(folder, exist_ok=True)
    lin.save_model(os.path.join(folder, "model.json"))
    if VERSION >= (2, 0):
        Y = np.column_stack([y, y / 2])
        dm = xgb.DMatrix(X, label=Y, feature_names=names)
        mt = xgb.train({"tree_method": "hist", "multi_strategy": "multi_output_tree", "max_depth": 2, "nthread": 1}, dm, 2)
        folder = os.path.join(out, "%s_refuse_vector_leaf" % PREFIX)
        os.makedirs(folder, exist_ok=True)
        mt.save_model(os.path.join(folder, "model.json"))


def seed(out):
    """A tiny categorical model (2 rounds of depth 2), the fuzz target's seed:
    small inputs let the fuzzer mutate and minimise quickly."""
    rng = np.random.default_rng(SEED)
    X, y, names = diabetes_cat(rng)
    kw = dict(feature_names=names, feature_types=["q"] * (X.shape[1] - 1) + ["c"], enable_categorical=True)
    bst = xgb.train({"max_depth": 2, "nthread": 1, "tree_method": "hist", "max_cat_to_onehot": 1, "seed": 7},
                    xgb.DMatrix(X[:, -3:], label=y, **dict(kw, feature_names=names[-3:], feature_types=kw["feature_types"][-3:])), 2)
    folder = os.path.join(out, "seed_%s" % PREFIX)
    os.makedirs(folder, exist_ok=True)
    bst.save_model(os.path.join(folder, "model.json"))
    bst.save_model(os.path.join(folder, "model.ubj"))


# The cases also saved as UBJSON: every construct the binary form must carry
# (per-class trees, categories, dart weights, vector base scores, attributes).
UBJ_CASES = {"binary_logistic", "multi_softprob", "categorical", "dart", "reg_quantileerror", "early_stop",
             "count_poisson", "missing_sentinel"}

# XGBoost 2.x: the cases where the stored base score and its link matter,
# plus categorical splits, dart and several quantiles, to keep the committed
# fixtures small.
SUBSET_2X = {"binary_logistic", "binary_logitraw", "multi_softprob", "count_poisson", "survival_cox",
             "reg_squarederror", "categorical", "dart", "early_stop", "reg_quantileerror"}


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else ROOT
    os.makedirs(out, exist_ok=True)
    for name, data, params, extra in cases():
        if VERSION[0] == 2 and name not in SUBSET_2X:
            continue
        build(name, data, params, extra, out)
    if VERSION[0] != 2:
        refused(out)
        if len(sys.argv) <= 1:
            seed(out)


if __name__ == "__main__":
    main()
