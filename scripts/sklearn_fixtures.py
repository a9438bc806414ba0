#!/usr/bin/python3
"""Write the scikit-learn reference fixtures under golden/testdata/.

Run it by hand from anywhere with a Python that has scikit-learn (the fixtures
are built with Debian's python3-sklearn 1.2.1, run as /usr/bin/python3):

    /usr/bin/python3 scripts/sklearn_fixtures.py

Tests never run this script; they read the committed files. Running it twice
gives byte-identical files.

Datasets, both shipped inside scikit-learn (no download); citations as the
datasets' DESCR text in scikit-learn gives them:

- Wine: Forina, M. et al., PARVUS - An Extendible Package for Data
  Exploration, Classification and Correlation; UCI Machine Learning
  Repository (sklearn.datasets.load_wine).
- Breast Cancer Wisconsin (Diagnostic): W.N. Street, W.H. Wolberg and
  O.L. Mangasarian, Nuclear feature extraction for breast tumor diagnosis
  (1993); O.L. Mangasarian, W.N. Street and W.H. Wolberg, Breast cancer
  diagnosis and prognosis via linear programming (1995); UCI Machine Learning
  Repository (sklearn.datasets.load_breast_cancer).

For each dataset, in golden/testdata/sklearn-<name>/:

- model.json   a RandomForestClassifier in sawmill's forest format
- rows.csv     id, then the features: every dataset row, then probe rows that
               put one split's feature exactly at, and just around, its
               threshold
- sklearn.csv  id, predict_proba per class, sklearn_class, for every row of
               rows.csv in the same order
- probes.csv   one line per probe row: which tree and node it probes, the
               kind of value, and which way sklearn's tree went at that node
- data.csv     the dataset: the features and a "label" column
- oob.json     sklearn's out-of-bag error of a larger forest over 5 seeds
"""

import json
import os
import sys

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.ensemble import RandomForestClassifier

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "golden", "testdata")

MODEL_SETTINGS = dict(
    n_estimators=30,
    criterion="gini",
    max_depth=None,
    min_samples_leaf=1,
    max_features="sqrt",
    bootstrap=True,
)
MODEL_SEED = 20240501
PROBE_NODES = 64  # split nodes probed per dataset, 6 probe rows each
PROBE_SEED = 7
OOB_SETTINGS = dict(n_estimators=200, max_features="sqrt", min_samples_leaf=1, bootstrap=True)
OOB_SEEDS = [1, 2, 3, 4, 5]

DATASETS = [
    (
        "sklearn-wine",
        load_wine,
        "UCI Wine (Forina et al.; UCI Machine Learning Repository), sklearn.datasets.load_wine",
    ),
    (
        "sklearn-breast-cancer",
        load_breast_cancer,
        "Breast Cancer Wisconsin (Diagnostic) (Wolberg, Street, Mangasarian 1995; "
        "UCI Machine Learning Repository), sklearn.datasets.load_breast_cancer",
    ),
]


def num(x):
    """The shortest text that reads back to exactly the float64 x."""
    x = float(x)
    if not np.isfinite(x):
        raise ValueError("non-finite number %r" % x)
    return repr(x)


def write(path, text):
    """Write text atomically: a temporary file in the same folder, then a rename."""
    tmp = path + ".tmp"
    with open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)
    os.replace(tmp, path)


def csv_line(cells):
    for c in cells:
        if any(ch in c for ch in ',"\n\r'):
            raise ValueError("cell %r would need quoting" % c)
    return ",".join(cells) + "\n"


def leaf_probabilities(tree):
    """Per node, the class probabilities exactly as DecisionTreeClassifier.predict_proba
    computes them in scikit-learn 1.2: value / value.sum(), a zero sum left alone."""
    proba = tree.value[:, 0, :].copy()
    normalizer = proba.sum(axis=1)[:, np.newaxis]
    normalizer[normalizer == 0.0] = 1.0
    proba /= normalizer
    return proba


def model_doc(rf, features, classes, citation):
    trees = []
    for est in rf.estimators_:
        t = est.tree_
        leaf = t.children_left == -1
        proba = leaf_probabilities(t)
        trees.append(
            dict(
                feature=[-1 if leaf[i] else int(t.feature[i]) for i in range(t.node_count)],
                threshold=[0.0 if leaf[i] else float(t.threshold[i]) for i in range(t.node_count)],
                left=[int(c) for c in t.children_left],
                right=[int(c) for c in t.children_right],
                missing_left=[False] * t.node_count,
                value=[[float(v) for v in proba[i]] for i in range(t.node_count)],
            )
        )
    provenance = dict(
        trainer="scikit-learn %s RandomForestClassifier" % sklearn.__version__,
        sklearn_version=sklearn.__version__,
        settings=dict(MODEL_SETTINGS, random_state=MODEL_SEED),
        dataset=citation,
        oob_error=float(1.0 - rf.oob_score_),
        note="leaf values are tree_.value normalised to sum 1, as predict_proba does",
    )
    return dict(
        sawmill_forest=1,
        task="classification",
        features=features,
        classes=classes,
        input_precision="float32",
        combine="average",
        output_transform="none",
        base_score=[0.0] * len(classes),
        trees=trees,
        provenance=provenance,
    )


def dump_model(doc):
    """The model document with each tree array on one line."""
    d = lambda v: json.dumps(v, ensure_ascii=False, allow_nan=False)
    out = ["{"]
    for key in ("sawmill_forest", "task", "features", "classes", "input_precision",
                "combine", "output_transform", "base_score"):
        out.append("  %s: %s," % (d(key), d(doc[key])))
    out.append('  "trees": [')
    for ti, t in enumerate(doc["trees"]):
        out.append("    {")
        keys = ("feature", "threshold", "left", "right", "missing_left", "value")
        for ki, key in enumerate(keys):
            out.append("      %s: %s%s" % (d(key), d(t[key]), "," if ki < len(keys) - 1 else ""))
        out.append("    }" + ("," if ti < len(doc["trees"]) - 1 else ""))
    out.append("  ],")
    out.append('  "provenance": ' + json.dumps(doc["provenance"], indent=2, sort_keys=True).replace("\n", "\n  "))
    out.append("}")
    return "\n".join(out) + "\n"


def interpreter_average(rf, X):
    """sawmill's "average": leaf vectors summed from zero in tree order, then / T."""
    acc = np.zeros((X.shape[0], rf.n_classes_))
    for est in rf.estimators_:
        proba = leaf_probabilities(est.tree_)
        acc = acc + proba[est.apply(X.astype(np.float32))]
    return acc / len(rf.estimators_)


def probes(rf, X):
    """Probe rows: for PROBE_NODES sampled split nodes, a dataset row that reaches
    the node with the split's feature set to the threshold, to float32(threshold),
    to the float32 neighbours of that, and to the float64 neighbours of the
    threshold."""
    X32 = X.astype(np.float32)
    splits = [(ti, n) for ti, est in enumerate(rf.estimators_)
              for n in range(est.tree_.node_count) if est.tree_.children_left[n] != -1]
    rng = np.random.RandomState(PROBE_SEED)
    pick = sorted(rng.choice(len(splits), size=min(PROBE_NODES, len(splits)), replace=False))
    rows, meta = [], []
    for k in pick:
        ti, n = splits[k]
        est = rf.estimators_[ti]
        t = est.tree_
        f, thr = int(t.feature[n]), float(t.threshold[n])
        reach = np.flatnonzero(est.decision_path(X32)[:, n].toarray().ravel())
        base = int(reach[rng.randint(len(reach))])
        t32 = np.float32(thr)
        values = [
            ("thr", thr),
            ("f32", float(t32)),
            ("f32up", float(np.nextafter(t32, np.float32(np.inf)))),
            ("f32down", float(np.nextafter(t32, np.float32(-np.inf)))),
            ("f64up", float(np.nextafter(thr, np.inf))),
            ("f64down", float(np.nextafter(thr, -np.inf))),
        ]
        for kind, v in values:
            row = X[base].copy()
            row[f] = v
            rows.append(row)
            meta.append(dict(id="probe-t%02d-n%04d-%s" % (ti, n, kind), tree=ti, node=n,
                             feature=f, threshold=thr, value=v, kind=kind, base_row=base))
    P = np.array(rows)
    P32 = P.astype(np.float32)
    for i, m in enumerate(meta):
        t = rf.estimators_[m["tree"]].tree_
        path = rf.estimators_[m["tree"]].decision_path(P32[i:i + 1]).toarray().ravel()
        n = m["node"]
        if not path[n]:
            m["side"] = "unreached"
        elif path[t.children_left[n]]:
            m["side"] = "left"
        else:
            m["side"] = "right"
    return P, meta


def build(folder, loader, citation):
    ds = loader()
    X, y = ds.data.astype(np.float64), ds.target
    features = [name.replace(" ", "_") for name in ds.feature_names]
    classes = [str(c) for c in ds.target_names]
    assert len(set(features)) == len(features)

    rf = RandomForestClassifier(random_state=MODEL_SEED, oob_score=True, **MODEL_SETTINGS)
    rf.fit(X, y)
    assert list(rf.classes_) == list(range(len(classes)))

    P, meta = probes(rf, X)
    R = np.vstack([X, P])
    ids = [str(i) for i in range(len(X))] + [m["id"] for m in meta]
    proba = rf.predict_proba(R)
    pred = rf.predict(R)

    ours = interpreter_average(rf, R)
    diff = float(np.max(np.abs(ours - proba)))
    exact = int(np.sum(np.all(ours == proba, axis=1)))
    if diff > 1e-12:
        sys.exit("%s: sum-then-divide differs from predict_proba by %g" % (folder, diff))

    d = os.path.join(OUT, folder)
    os.makedirs(d, exist_ok=True)
    write(os.path.join(d, "model.json"), dump_model(model_doc(rf, features, classes, citation)))

    text = [csv_line(["id"] + features)]
    for i, row in zip(ids, R):
        text.append(csv_line([i] + [num(v) for v in row]))
    write(os.path.join(d, "rows.csv"), "".join(text))

    text = [csv_line(["id"] + classes + ["sklearn_class"])]
    for i, p, c in zip(ids, proba, pred):
        text.append(csv_line([i] + [num(v) for v in p] + [classes[int(c)]]))
    write(os.path.join(d, "sklearn.csv"), "".join(text))

    cols = ["id", "tree", "node", "feature", "threshold", "kind", "value", "base_row", "sklearn_side"]
    text = [csv_line(cols)]
    for m in meta:
        text.append(csv_line([m["id"], str(m["tree"]), str(m["node"]), str(m["feature"]),
                              num(m["threshold"]), m["kind"], num(m["value"]), str(m["base_row"]),
                              m["side"]]))
    write(os.path.join(d, "probes.csv"), "".join(text))

    text = [csv_line(features + ["label"])]
    for row, label in zip(X, y):
        text.append(csv_line([num(v) for v in row] + [classes[int(label)]]))
    write(os.path.join(d, "data.csv"), "".join(text))

    errors = []
    for seed in OOB_SEEDS:
        big = RandomForestClassifier(random_state=seed, oob_score=True, **OOB_SETTINGS).fit(X, y)
        errors.append(float(1.0 - big.oob_score_))
    oob = dict(
        sklearn_version=sklearn.__version__,
        dataset=citation,
        settings=OOB_SETTINGS,
        seeds=OOB_SEEDS,
        oob_errors=errors,
        oob_error_mean=float(np.mean(errors)),
    )
    write(os.path.join(d, "oob.json"), json.dumps(oob, indent=2) + "\n")

    sides = {}
    for m in meta:
        sides.setdefault(m["kind"], {}).setdefault(m["side"], 0)
        sides[m["kind"]][m["side"]] += 1
    print("%s: %d rows (%d probes), %d trees, %d nodes; interpreter average vs predict_proba: "
          "max |diff| %g, %d of %d rows bit-identical; oob error mean %.6f"
          % (folder, len(R), len(meta), len(rf.estimators_),
             sum(e.tree_.node_count for e in rf.estimators_), diff, exact, len(R), oob["oob_error_mean"]))
    print("  probe sides by kind: %s" % json.dumps(sides, sort_keys=True))


def main():
    if sklearn.__version__ != "1.2.1":
        print("warning: fixtures were made with scikit-learn 1.2.1, this is %s" % sklearn.__version__,
              file=sys.stderr)
    for folder, loader, citation in DATASETS:
        build(folder, loader, citation)


if __name__ == "__main__":
    main()
