"""Time scikit-learn's RandomForestClassifier fit on a CSV table.

Usage: sklearn_fit.py DATA.csv TREES JOBS SEED

The label is the last column; every other column is a feature. Prints
"sklearn_fit_seconds S" and "sklearn_nodes N". Reading the file is not timed.
"""
import csv
import sys
import time

import numpy as np
import sklearn
from sklearn.ensemble import RandomForestClassifier


def main():
    path, trees, jobs, seed = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
    with open(path, newline="") as fh:
        rows = list(csv.reader(fh))[1:]
    X = np.array([[float(v) for v in r[:-1]] for r in rows])
    y = np.array([r[-1] for r in rows])
    rf = RandomForestClassifier(n_estimators=trees, n_jobs=jobs, max_features="sqrt",
                                bootstrap=True, min_samples_leaf=1, random_state=seed)
    start = time.perf_counter()
    rf.fit(X, y)
    secs = time.perf_counter() - start
    print("sklearn_version %s" % sklearn.__version__)
    print("sklearn_fit_seconds %.3f" % secs)
    print("sklearn_nodes %d" % sum(e.tree_.node_count for e in rf.estimators_))


if __name__ == "__main__":
    main()
