"""Train scikit-learn's RandomForestClassifier on a CSV table, write it as a
sawmill forest file, and time its batch predict_proba over the same rows.

Usage: sklearn_predict.py DATA.csv MODEL.json TREES JOBS SEED REPS

The label is the last column; every other column is a feature. The model is
written the way scripts/sklearn_fixtures.py writes the golden fixtures
(float32 inputs, leaf values tree_.value normalised to sum 1, as
predict_proba computes them in scikit-learn 1.2). Prints "sklearn_version",
"sklearn_nodes", "sklearn_predict_seconds" (median of REPS runs over every
row, n_jobs=JOBS) and "sklearn_checksum" (the sum of all probabilities of
class 1, for the other side to match).
"""
import csv
import json
import os
import statistics
import sys
import time

import numpy as np
import sklearn
from sklearn.ensemble import RandomForestClassifier


def main():
    path, out, trees, jobs, seed, reps = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5]), int(sys.argv[6])
    with open(path, newline="") as fh:
        rows = list(csv.reader(fh))
    header, rows = rows[0], rows[1:]
    features = header[:-1]
    X = np.array([[float(v) for v in r[:-1]] for r in rows])
    y = np.array([r[-1] for r in rows])
    rf = RandomForestClassifier(n_estimators=trees, n_jobs=jobs, max_features="sqrt",
                                bootstrap=True, min_samples_leaf=1, random_state=seed)
    rf.fit(X, y)
    docs = []
    for est in rf.estimators_:
        t = est.tree_
        leaf = t.children_left == -1
        proba = t.value[:, 0, :].copy()
        norm = proba.sum(axis=1)[:, np.newaxis]
        norm[norm == 0.0] = 1.0
        proba /= norm
        docs.append(dict(
            feature=[-1 if leaf[i] else int(t.feature[i]) for i in range(t.node_count)],
            threshold=[0.0 if leaf[i] else float(t.threshold[i]) for i in range(t.node_count)],
            left=[int(c) for c in t.children_left],
            right=[int(c) for c in t.children_right],
            value=[[float(v) for v in proba[i]] for i in range(t.node_count)],
        ))
    doc = dict(sawmill_forest=1, task="classification", features=features,
               classes=[str(c) for c in rf.classes_], input_precision="float32",
               combine="average", output_transform="none", base_score=[0.0] * len(rf.classes_),
               trees=docs, provenance=dict(trainer="scikit-learn %s RandomForestClassifier" % sklearn.__version__,
                                           random_state=seed, note="benchmark model on an invented table"))
    tmp = out + ".tmp"
    with open(tmp, "w") as fh:
        json.dump(doc, fh)
    os.replace(tmp, out)

    times = []
    for _ in range(reps):
        start = time.perf_counter()
        p = rf.predict_proba(X)
        times.append(time.perf_counter() - start)
    print("sklearn_version %s" % sklearn.__version__)
    print("sklearn_nodes %d" % sum(e.tree_.node_count for e in rf.estimators_))
    print("sklearn_predict_seconds %.4f" % statistics.median(times))
    print("sklearn_checksum %.17g" % float(p[:, 1].sum()))


if __name__ == "__main__":
    main()
