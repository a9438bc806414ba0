#!/usr/bin/env python3
"""Write the ONNX-ML reference fixtures under source/testdata/onnx/.

Run it by hand from the repository with a Python that has the packages pinned
in python/requirements.txt (onnx, onnxruntime, skl2onnx, onnxmltools,
scikit-learn, xgboost, lightgbm, numpy):

    python scripts/onnx_fixtures.py

Tests never run this script; they read the committed files. Running it twice
gives the same files (fixed seeds, one thread).

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

Models come from skl2onnx (scikit-learn forests and gradient boosting),
onnxmltools (XGBoost, LightGBM) and onnx.helper (node modes, missing-value
tracking and transforms that no converter writes). For each, in
source/testdata/onnx/<name>/:

- model.onnx    the model as the converter wrote it
- rows.csv      features f0..f{F-1}: held-out rows, then probe rows that put
                one feature at, just below and just above (as float32) every
                threshold the model uses, and at NaN
- expected.csv  ONNX Runtime on one thread (intra_op_num_threads=1), run on the
                ensemble node alone: raw_0.. with post_transform NONE, out_0..
                with the model's own post_transform, and for a classifier the
                index of the predicted label; every number in Python's repr
- sklearn.csv   where the model came from scikit-learn: its predict_proba (or
                predict) in float64 on the same rows (empty on rows with a
                NaN, which not every estimator takes), to count where the ONNX
                model (float32 thresholds and inputs) already disagrees
- reference.csv onnx.reference's outputs, where it runs the model
- meta.json     where the model came from, and for a model sawmill must
                refuse, the error expected
"""

import csv
import json
import os
import shutil
import sys
import warnings

import numpy as np
import onnx
import onnxruntime as ort
from onnx import TensorProto as TP
from onnx import helper as oh
from onnx import numpy_helper as nh
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine

warnings.filterwarnings("ignore")

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "source", "testdata", "onnx")
# SEED shifts every training seed and the hand-built models' generator: the
# committed fixtures use 0, scripts/onnx_live_check.py another.
SEED = 0
QUIET = False
OPSETS = {"": 17, "ai.onnx.ml": 3}


def dataset(name):
    if name == "breast_cancer":
        d = load_breast_cancer()
        X, y = d.data[:, :8].copy(), d.target.astype(int)
    elif name == "wine":
        d = load_wine()
        X, y = d.data[:, :8].copy(), d.target.astype(int)
    elif name == "diabetes":
        d = load_diabetes()
        X, y = d.data[:, :8].copy(), d.target.astype(float)
    else:
        raise ValueError(name)
    # Four significant digits keep the committed rows small; the models are
    # trained on these values.
    X = np.vectorize(lambda v: float(f"{v:.4g}"))(X)
    rng = np.random.default_rng(20240601 + SEED)
    idx = rng.permutation(len(X))
    test = idx[:40]
    train = idx[40:]
    return X[train], y[train], X[test]


def session(model):
    so = ort.SessionOptions()
    so.intra_op_num_threads = 1
    so.inter_op_num_threads = 1
    so.log_severity_level = 3
    return ort.InferenceSession(model.SerializeToString(), so, providers=["CPUExecutionProvider"])


def ensemble_node(model):
    nodes = [n for n in model.graph.node if n.op_type.startswith("TreeEnsemble")]
    assert len(nodes) == 1, [n.op_type for n in model.graph.node]
    return nodes[0]


def ensemble_only(model, post=None):
    """The model cut down to its tree-ensemble node, outputs exposed, with
    post_transform replaced when post is given."""
    m = onnx.ModelProto()
    m.CopyFrom(model)
    node = ensemble_node(m)
    if post is not None and node.op_type == "TreeEnsemble":
        for a in node.attribute:
            if a.name == "post_transform":
                a.i = V5_TRANSFORMS.index(post)
    elif post is not None:
        for a in node.attribute:
            if a.name == "post_transform":
                a.s = post.encode()
                break
        else:
            node.attribute.append(oh.make_attribute("post_transform", post))
    del m.graph.node[:]
    m.graph.node.append(node)
    del m.graph.output[:]
    for i, o in enumerate(node.output):
        if node.op_type == "TreeEnsembleClassifier" and i == 0:
            labels = [a for a in node.attribute if a.name == "classlabels_strings"]
            t = TP.STRING if labels else TP.INT64
            m.graph.output.append(oh.make_tensor_value_info(o, t, [None]))
        else:
            m.graph.output.append(oh.make_tensor_value_info(o, TP.FLOAT, [None, None]))
    return m


def thresholds(model):
    node = ensemble_node(model)
    at = {a.name: a for a in node.attribute}
    if node.op_type == "TreeEnsemble":
        feats = list(at["nodes_featureids"].ints)
        modes = list(nh.to_array(at["nodes_modes"].t))
        vals = list(nh.to_array(at["nodes_splits"].t))
        return sorted({(f, float(np.float32(v))) for f, m, v in zip(feats, modes, vals) if m != 6})
    feats = list(at["nodes_featureids"].ints)
    modes = [s.decode() for s in at["nodes_modes"].strings]
    vals = list(at["nodes_values"].floats) if "nodes_values" in at else list(nh.to_array(at["nodes_values_as_tensor"].t))
    return sorted({(f, float(np.float32(v))) for f, m, v in zip(feats, modes, vals) if m != "LEAF"})


def probe_rows(model, held, nf, limit=120):
    """Rows at, just below and just above every threshold (as float32), and NaN."""
    ths = thresholds(model)
    rng = np.random.default_rng(7)
    if len(ths) > limit // 3:
        pick = rng.choice(len(ths), limit // 3, replace=False)
        ths = [ths[i] for i in sorted(pick)]
    rows = []
    for i, (f, t) in enumerate(ths):
        base = held[i % len(held)].copy()
        t32 = np.float32(t)
        for v in (t32, np.nextafter(t32, np.float32(-np.inf)), np.nextafter(t32, np.float32(np.inf))):
            r = base.copy()
            r[f] = float(v)
            rows.append(r)
        if i % 4 == 0:
            r = base.copy()
            r[f] = np.nan
            rows.append(r)
    return np.array(rows).reshape(-1, nf)


def fmt(v):
    v = float(v)
    if np.isnan(v):
        return "nan"
    return repr(v)


def write_csv(path, head, rows):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(head)
        for r in rows:
            w.writerow(r)


def run_ort(model, X):
    node = ensemble_node(model)
    classifier = node.op_type == "TreeEnsembleClassifier"
    X32 = X.astype(np.float32)
    name = model.graph.input[0].name
    out = session(ensemble_only(model)).run(None, {name: X32})
    raw = session(ensemble_only(model, "NONE")).run(None, {name: X32})
    # The whole model (ZipMap, Cast and all) must run and agree.
    full = session(model).run(None, {name: X32})
    if classifier:
        labels, probs = out
        rawp = raw[1]
        lab = [a for a in node.attribute if a.name in ("classlabels_int64s", "classlabels_strings")][0]
        names = list(lab.ints) if lab.name == "classlabels_int64s" else [s.decode() for s in lab.strings]
        label_idx = [names.index(l if not isinstance(l, bytes) else l.decode()) for l in labels]
        fp = full[1]
        if isinstance(fp, list):  # ZipMap: a list of {label: probability}
            fp = np.array([[d[n] for n in names] for d in fp], dtype=np.float32)
        assert np.array_equal(np.asarray(fp, dtype=np.float32).view(np.uint32), probs.view(np.uint32)), "full model differs"
        return rawp, probs, label_idx
    assert np.array_equal(np.asarray(full[0], dtype=np.float32).view(np.uint32), out[0].view(np.uint32)), "full model differs"
    return raw[0], out[0], None


def run_reference(model, X):
    try:
        from onnx.reference import ReferenceEvaluator

        node = ensemble_node(model)
        m = ensemble_only(model)
        outs = ReferenceEvaluator(m).run(None, {m.graph.input[0].name: X.astype(np.float32)})
        return np.asarray(outs[1] if node.op_type == "TreeEnsembleClassifier" else outs[0], dtype=np.float64)
    except Exception as e:  # onnx.reference does not run every model
        return "onnx.reference: " + str(e).splitlines()[0][:200]


def save(name, model, X, meta, skl=None):
    d = os.path.join(OUT, name)
    if os.path.isdir(d):
        shutil.rmtree(d)
    os.makedirs(d)
    # skl2onnx lists the opset imports in a set's order: sort them so that a
    # rerun writes the same bytes.
    ops = sorted(model.opset_import, key=lambda o: o.domain)
    del model.opset_import[:]
    model.opset_import.extend(ops)
    onnx.save(model, os.path.join(d, "model.onnx"))
    nf = X.shape[1]
    write_csv(os.path.join(d, "rows.csv"), [f"f{j}" for j in range(nf)], [[fmt(v) if not np.isnan(v) else "" for v in r] for r in X])
    if "error" not in meta:
        raw, out, labels = run_ort(model, X)
        k = raw.shape[1]
        head = [f"raw_{j}" for j in range(k)] + [f"out_{j}" for j in range(out.shape[1])]
        rows = [[fmt(v) for v in list(raw[i]) + list(out[i])] for i in range(len(X))]
        if labels is not None:
            head.append("label")
            for i, r in enumerate(rows):
                r.append(str(labels[i]))
        write_csv(os.path.join(d, "expected.csv"), head, rows)
        ref = run_reference(model, X)
        if isinstance(ref, str):
            meta["reference"] = ref
        else:
            write_csv(os.path.join(d, "reference.csv"), [f"ref_{j}" for j in range(ref.shape[1])], [[fmt(v) for v in r] for r in ref])
        if skl is not None:
            # Rows with a NaN are left empty: not every estimator takes them.
            ok = ~np.isnan(X).any(axis=1)
            p = skl(X[ok]).reshape(int(ok.sum()), -1)
            full = np.full((len(X), p.shape[1]), np.nan)
            full[ok] = p
            write_csv(os.path.join(d, "sklearn.csv"), [f"skl_{j}" for j in range(p.shape[1])], [[fmt(v) if not np.isnan(v) else "" for v in r] for r in full])
    meta["onnx"] = onnx.__version__
    meta["onnxruntime"] = ort.__version__
    with open(os.path.join(d, "meta.json"), "w") as fh:
        json.dump(meta, fh, indent=1, sort_keys=True)
        fh.write("\n")
    if not QUIET:
        print("wrote", name, X.shape)


def rows_for(model, held):
    """Held-out rows without NaN (every converter and library agree on
    those), then the probe rows."""
    return np.vstack([held, probe_rows(model, held, held.shape[1])])


# ---------------------------------------------------------------- converters


def sklearn_models():
    from skl2onnx import to_onnx
    from sklearn.ensemble import (
        GradientBoostingClassifier,
        GradientBoostingRegressor,
        RandomForestClassifier,
        RandomForestRegressor,
        ExtraTreesClassifier,
    )
    from sklearn.tree import DecisionTreeRegressor
    import sklearn

    cases = [
        ("skl-rf-binary", "breast_cancer", RandomForestClassifier(n_estimators=8, max_depth=4, random_state=1 + SEED), {"zipmap": True}),
        ("skl-rf-wine", "wine", RandomForestClassifier(n_estimators=6, max_depth=4, random_state=2 + SEED), {"zipmap": False}),
        ("skl-et-wine", "wine", ExtraTreesClassifier(n_estimators=5, max_depth=4, random_state=3 + SEED), {"zipmap": False}),
        ("skl-rf-regression", "diabetes", RandomForestRegressor(n_estimators=6, max_depth=4, random_state=4 + SEED), {}),
        ("skl-gb-binary", "breast_cancer", GradientBoostingClassifier(n_estimators=12, max_depth=3, random_state=5 + SEED), {"zipmap": False}),
        ("skl-gb-wine", "wine", GradientBoostingClassifier(n_estimators=6, max_depth=3, random_state=6 + SEED), {"zipmap": False}),
        ("skl-gb-regression", "diabetes", GradientBoostingRegressor(n_estimators=15, max_depth=3, random_state=7 + SEED), {}),
        ("skl-dt-2targets", "diabetes", DecisionTreeRegressor(max_depth=5, random_state=8 + SEED), {}),
    ]
    for name, ds, est, opts in cases:
        Xtr, ytr, Xte = dataset(ds)
        if name == "skl-dt-2targets":
            ytr = np.column_stack([ytr, np.log(ytr)])
        est.fit(Xtr, ytr)
        options = {id(est): opts} if opts else None
        model = to_onnx(est, Xtr[:1].astype(np.float32), target_opset=OPSETS, options=options)
        X = rows_for(model, Xte)
        if hasattr(est, "predict_proba"):
            skl = est.predict_proba
        else:
            skl = est.predict
        save(name, model, X, {"source": "skl2onnx", "estimator": type(est).__name__, "dataset": ds, "scikit-learn": sklearn.__version__}, skl)


def xgboost_models():
    import onnxmltools
    import xgboost as xgb
    from onnxmltools.convert.common.data_types import FloatTensorType

    cases = [
        ("xgb-binary", "breast_cancer", xgb.XGBClassifier(n_estimators=10, max_depth=3, random_state=1 + SEED, n_jobs=1)),
        ("xgb-wine", "wine", xgb.XGBClassifier(n_estimators=5, max_depth=3, random_state=2 + SEED, n_jobs=1)),
        ("xgb-regression", "diabetes", xgb.XGBRegressor(n_estimators=12, max_depth=3, random_state=3 + SEED, n_jobs=1)),
    ]
    for name, ds, est in cases:
        Xtr, ytr, Xte = dataset(ds)
        est.fit(Xtr, ytr)
        try:
            model = onnxmltools.convert_xgboost(est, initial_types=[("input", FloatTensorType([None, Xtr.shape[1]]))], target_opset=15)
        except Exception as e:
            print("skipped", name, "onnxmltools", onnxmltools.__version__, "with xgboost", xgb.__version__, ":", str(e).splitlines()[0][:200], file=sys.stderr)
            continue
        model.graph.name = name  # onnxmltools names the graph by a random uuid
        X = rows_for(model, Xte)
        save(name, model, X, {"source": "onnxmltools", "estimator": type(est).__name__, "dataset": ds, "xgboost": xgb.__version__})


# onnxmltools 1.16.0 takes one number for target_opset (a dict fails inside
# it) and goes up to 15; for opset 15 it writes ai.onnx.ml opset 3, which save() checks.


def lightgbm_models():
    import lightgbm as lgb
    import onnxmltools
    from onnxmltools.convert.common.data_types import FloatTensorType

    common = dict(n_estimators=8, num_leaves=6, random_state=1 + SEED, n_jobs=1, verbose=-1, min_child_samples=5)
    cases = [
        ("lgb-binary", "breast_cancer", lgb.LGBMClassifier(**common)),
        ("lgb-wine", "wine", lgb.LGBMClassifier(**common)),
        ("lgb-regression", "diabetes", lgb.LGBMRegressor(**common)),
    ]
    for name, ds, est in cases:
        Xtr, ytr, Xte = dataset(ds)
        est.fit(Xtr, ytr)
        try:
            model = onnxmltools.convert_lightgbm(est, initial_types=[("input", FloatTensorType([None, Xtr.shape[1]]))], target_opset=15, zipmap=False)
        except Exception as e:
            print("skipped", name, "onnxmltools", onnxmltools.__version__, "with lightgbm", lgb.__version__, ":", str(e).splitlines()[0][:200], file=sys.stderr)
            continue
        model.graph.name = name  # onnxmltools names the graph by a random uuid
        X = rows_for(model, Xte)
        save(name, model, X, {"source": "onnxmltools", "estimator": type(est).__name__, "dataset": ds, "lightgbm": lgb.__version__})


# ---------------------------------------------------------------- by hand


def hand_model(op, attrs, nf, k, labels=None, extra_nodes=(), input_type=TP.FLOAT, opset_ml=3):
    out = ["Y"] if op != "TreeEnsembleClassifier" else ["L", "P"]
    node = oh.make_node(op, ["X"], out, domain="ai.onnx.ml", name="ensemble", **attrs)
    outputs = []
    if op == "TreeEnsembleClassifier":
        outputs.append(oh.make_tensor_value_info("L", TP.STRING if "classlabels_strings" in attrs else TP.INT64, [None]))
        outputs.append(oh.make_tensor_value_info("P", TP.FLOAT, [None, k]))
    else:
        outputs.append(oh.make_tensor_value_info("Y", TP.FLOAT, [None, k]))
    nodes = [node]
    for n, o in extra_nodes:
        nodes.append(n)
        outputs.append(o)
    g = oh.make_graph(nodes, "hand", [oh.make_tensor_value_info("X", input_type, [None, nf])], outputs)
    m = oh.make_model(g, opset_imports=[oh.make_opsetid("", 17), oh.make_opsetid("ai.onnx.ml", opset_ml)], producer_name="sawmill onnx_fixtures.py")
    m.ir_version = 9
    return m


def random_tree_attrs(rng, ntrees, depth, nf, k, modes, weight_prefix, track_rate=0.3, integer_eq=False, positive=False):
    """Full trees of the given depth with random modes, features, float32
    thresholds on a grid, and float32 leaf weights."""
    a = {key: [] for key in ["nodes_treeids", "nodes_nodeids", "nodes_featureids", "nodes_modes", "nodes_values", "nodes_truenodeids", "nodes_falsenodeids", "nodes_missing_value_tracks_true"]}
    w = {key: [] for key in ["treeids", "nodeids", "ids", "weights"]}
    grid = np.float32(np.round(rng.normal(0, 1, 64), 2))
    for t in range(ntrees):
        n = 2 ** (depth + 1) - 1
        for i in range(n):
            inner = 2 * i + 1 < n
            a["nodes_treeids"].append(t)
            a["nodes_nodeids"].append(i)
            if inner:
                mode = modes[rng.integers(len(modes))]
                a["nodes_modes"].append(mode)
                a["nodes_featureids"].append(int(rng.integers(nf)))
                if mode in ("BRANCH_EQ", "BRANCH_NEQ"):
                    v = float(rng.integers(0, 4)) if integer_eq or rng.random() < 0.5 else float(grid[rng.integers(8)])
                else:
                    v = float(grid[rng.integers(len(grid))])
                a["nodes_values"].append(v)
                a["nodes_truenodeids"].append(2 * i + 1)
                a["nodes_falsenodeids"].append(2 * i + 2)
                a["nodes_missing_value_tracks_true"].append(int(rng.random() < track_rate))
            else:
                a["nodes_modes"].append("LEAF")
                a["nodes_featureids"].append(0)
                a["nodes_values"].append(0.0)
                a["nodes_truenodeids"].append(0)
                a["nodes_falsenodeids"].append(0)
                a["nodes_missing_value_tracks_true"].append(0)
                for c in range(k):
                    w["treeids"].append(t)
                    w["nodeids"].append(i)
                    w["ids"].append(c)
                    v = float(np.float32(rng.normal(0, 1)))
                    w["weights"].append(abs(v) / 8 if positive else v)
    for key, v in w.items():
        a[weight_prefix + key] = v
    return a


def hand_rows(model, nf, rng, n=40):
    """Rows on the threshold grid (so that equality tests meet), a few NaN,
    then the probe rows."""
    grid = np.array(sorted({t for _, t in thresholds(model)} | {0.0, 1.0, 2.0, 3.0}))
    held = grid[rng.integers(len(grid), size=(n, nf))].astype(float)
    held[rng.random((n, nf)) < 0.08] = np.nan
    return np.vstack([held, probe_rows(model, held, nf)])


V5_TRANSFORMS = ["NONE", "SOFTMAX", "LOGISTIC", "SOFTMAX_ZERO", "PROBIT"]
V5_AGGREGATES = ["AVERAGE", "SUM", "MIN", "MAX"]


def v5_attrs(rng, ntrees, depth, nf, k, modes, fractional_member=False):
    """TreeEnsemble (ai.onnx.ml opset 5): full trees of the given depth, splits
    and leaves in their own arrays, modes as numbers (6 is BRANCH_MEMBER)."""
    grid = np.float32(np.round(rng.normal(0, 1, 64), 2))
    feats, modes_, splits, tids, tleaf, fids, fleaf, track, members = [], [], [], [], [], [], [], [], []
    ltarget, lweight, roots = [], [], []
    for t in range(ntrees):
        base = len(modes_)
        roots.append(base)
        inner = 2**depth - 1  # splits of a full tree, numbered breadth first
        leaf0 = len(lweight)
        for i in range(inner):
            m = modes[rng.integers(len(modes))]
            modes_.append(m)
            feats.append(int(rng.integers(nf)))
            if m == 6:
                splits.append(0.0)
                vals = sorted(set(int(v) for v in rng.integers(0, 5, size=int(rng.integers(1, 4)))))
                if fractional_member:
                    vals = [v + 0.5 for v in vals]
                members.extend([float(v) for v in vals] + [np.nan])
            elif m in (4, 5):
                splits.append(float(rng.integers(0, 4)) if rng.random() < 0.5 else float(grid[rng.integers(8)]))
            else:
                splits.append(float(grid[rng.integers(len(grid))]))
            track.append(int(rng.random() < 0.3))
            for side, (ids, leafs) in enumerate([(tids, tleaf), (fids, fleaf)]):
                c = 2 * i + 1 + side
                if c < inner:
                    ids.append(base + c)
                    leafs.append(0)
                else:
                    ids.append(leaf0 + c - inner)
                    leafs.append(1)
        for j in range(inner + 1):
            ltarget.append(int(rng.integers(k)))
            lweight.append(float(np.float32(rng.normal(0, 1))))
    return dict(
        tree_roots=roots, nodes_featureids=feats, nodes_modes=nh.from_array(np.array(modes_, dtype=np.uint8)),
        nodes_splits=nh.from_array(np.array(splits, dtype=np.float32)), nodes_truenodeids=tids, nodes_trueleafs=tleaf,
        nodes_falsenodeids=fids, nodes_falseleafs=fleaf, nodes_missing_value_tracks_true=track,
        membership_values=nh.from_array(np.array(members or [np.nan], dtype=np.float32)),
        leaf_targetids=ltarget, leaf_weights=nh.from_array(np.array(lweight, dtype=np.float32)), n_targets=k)


ALL_MODES = ["BRANCH_LEQ", "BRANCH_LT", "BRANCH_GTE", "BRANCH_GT", "BRANCH_EQ", "BRANCH_NEQ"]


def hand_models():
    rng = np.random.default_rng(12 + SEED)
    nf = 4

    def reg(name, k, post="NONE", agg="SUM", base=None, modes=ALL_MODES, ntrees=4, depth=3, note=""):
        a = random_tree_attrs(rng, ntrees, depth, nf, k, modes, "target_")
        a.update(n_targets=k, post_transform=post, aggregate_function=agg)
        if base is not None:
            a["base_values"] = base
        m = hand_model("TreeEnsembleRegressor", a, nf, k)
        meta = {"source": "onnx.helper", "note": note}
        if post in ("PROBIT",) or agg in ("MIN", "MAX"):
            meta["error"] = {"PROBIT": "post_transform PROBIT", "MIN": "aggregate_function \"MIN\"", "MAX": "aggregate_function \"MAX\""}[post if post == "PROBIT" else agg]
        save(name, m, hand_rows(m, nf, rng), meta)

    def clf(name, k, post="NONE", base=None, ids_only=None, modes=ALL_MODES, ntrees=4, depth=3, error=None, note="", labels=None, positive=False):
        a = random_tree_attrs(rng, ntrees, depth, nf, k if ids_only is None else 1, modes, "class_", positive=positive)
        if ids_only is not None:
            a["class_ids"] = [ids_only] * len(a["class_ids"])
        labels = labels or list(range(k))
        if isinstance(labels[0], str):
            a["classlabels_strings"] = labels
        else:
            a["classlabels_int64s"] = labels
        a["post_transform"] = post
        if base is not None:
            a["base_values"] = base
        m = hand_model("TreeEnsembleClassifier", a, nf, k)
        meta = {"source": "onnx.helper", "note": note}
        if error:
            meta["error"] = error
        save(name, m, hand_rows(m, nf, rng), meta)

    reg("hand-modes-sum", 1, base=[0.5], note="every node mode, missing-value tracking, base value added after the trees")
    reg("hand-modes-integer-eq", 1, modes=["BRANCH_EQ", "BRANCH_NEQ", "BRANCH_LEQ"], base=[1e3], note="equality on whole numbers: set splits")
    reg("hand-modes-average", 2, agg="AVERAGE", base=[0.25, -3.0], note="AVERAGE with two targets and base values")
    reg("hand-logistic-regressor", 1, post="LOGISTIC", base=[-0.5])
    reg("hand-softmax-regressor", 3, post="SOFTMAX", base=[0.1, 0.2, 0.3])
    reg("hand-softmax-1target", 1, post="SOFTMAX", note="one target: ONNX Runtime does not apply SOFTMAX")
    reg("hand-logistic-2targets", 2, post="LOGISTIC", base=[0.5, -1.0])
    reg("hand-probit", 1, post="PROBIT")
    reg("hand-min", 1, agg="MIN")
    clf("hand-classifier-3", 3, base=[0.1, -0.2, 0.3], note="three labels, NONE, base values")
    clf("hand-classifier-softmax", 3, post="SOFTMAX", labels=["low", "mid", "high"])
    clf("hand-classifier-logistic", 3, post="LOGISTIC")
    clf("hand-binary-none", 2, ids_only=0, base=[0.2], note="weights only for class 0: ONNX Runtime's binary case, [-s, s]")
    clf("hand-binary-logistic", 2, post="LOGISTIC", ids_only=0, base=[-0.3], note="binary case with LOGISTIC: [1-p, p]")
    clf("hand-binary-positive-none", 2, ids_only=0, base=[0.125], positive=True, note="binary case, no negative weight: [1-s, s]")
    clf("hand-binary-positive-logistic", 2, post="LOGISTIC", ids_only=0, positive=True, note="binary case, no negative weight: label is s > 0.5")
    clf("hand-binary-softmax", 2, post="SOFTMAX", ids_only=0, note="binary case: ONNX Runtime does not apply SOFTMAX")
    clf("hand-binary-softmax-zero", 2, post="SOFTMAX_ZERO", ids_only=0, note="binary case: ONNX Runtime does not apply SOFTMAX_ZERO")
    clf("hand-class1-only", 2, post="LOGISTIC", ids_only=1, note="weights only for class 1: not the binary case, [logistic(0), logistic(s)]")
    clf("hand-softmax-zero", 3, post="SOFTMAX_ZERO", error="post_transform SOFTMAX_ZERO")
    def v5(name, k, post="NONE", agg="SUM", modes=(0, 1, 2, 3, 4, 5, 6), error=None, note="", fractional_member=False):
        a = v5_attrs(rng, 4, 3, nf, k, list(modes), fractional_member=fractional_member)
        a.update(post_transform=V5_TRANSFORMS.index(post), aggregate_function=V5_AGGREGATES.index(agg))
        m = hand_model("TreeEnsemble", a, nf, k, opset_ml=5)
        meta = {"source": "onnx.helper", "note": note}
        if error:
            meta["error"] = error
        save(name, m, hand_rows(m, nf, rng), meta)

    v5("hand-v5-modes-sum", 1, note="TreeEnsemble (opset 5): every node mode with BRANCH_MEMBER, missing-value tracking")
    v5("hand-v5-average-2targets", 2, agg="AVERAGE")
    # onnxruntime 1.31.1 applies LOGISTIC for post_transform 1 (SOFTMAX in
    # the standard) and SOFTMAX for 2 (LOGISTIC): sawmill refuses both.
    v5("hand-v5-softmax-3targets", 3, post="SOFTMAX", error="ONNX Runtime 1.31.1 applies LOGISTIC instead")
    v5("hand-v5-logistic-2targets", 2, post="LOGISTIC", error="ONNX Runtime 1.31.1 applies SOFTMAX instead")
    v5("hand-v5-member-fraction", 1, modes=(6, 0), fractional_member=True, error="sawmill reads sets of whole numbers")
    # A graph with a node that is not read, after the ensemble.
    a = random_tree_attrs(rng, 2, 2, nf, 1, ALL_MODES, "target_")
    a.update(n_targets=1)
    extra = (oh.make_node("Abs", ["Y"], ["Z"], name="absolute"), oh.make_tensor_value_info("Z", TP.FLOAT, [None, 1]))
    m = hand_model("TreeEnsembleRegressor", a, nf, 1, extra_nodes=[extra])
    save("hand-refuse-abs", m, hand_rows(m, nf, rng, 4), {"source": "onnx.helper", "error": "graph node 1 \"absolute\" (op Abs): not read"})
    reg("hand-softmax-zero-1target", 1, post="SOFTMAX_ZERO", note="one target: ONNX Runtime does not apply SOFTMAX_ZERO")


def build(out, seed=0, quiet=False):
    """Write every model under out, training with seeds shifted by seed."""
    global OUT, SEED, QUIET
    OUT, SEED, QUIET = out, seed, quiet
    os.makedirs(OUT, exist_ok=True)
    sklearn_models()
    xgboost_models()
    lightgbm_models()
    hand_models()


if __name__ == "__main__":
    build(OUT)
