#!/usr/bin/python3
"""Train fresh scikit-learn models with the installed library, export them with
python/sawmill_export.py, and hold sawmill to scikit-learn.

    .venv/bin/python scripts/sklearn_live_check.py        # the pinned release
    /usr/bin/python3 scripts/sklearn_live_check.py        # Debian's python3-sklearn 1.2.1

For every supported estimator kind and option that changes a prediction, it
trains a small model on real data, pickles it, exports it through the
command line, and checks:

- `sawmill predict --raw` equals scikit-learn's raw score bit for bit
  (predict_proba / predict for the forests, _raw_predict for the boosters);
- `sawmill predict` equals predict_proba / predict within 1e-12 (the
  transforms exp, logistic and softmax are scikit-learn's own formulas, so
  a few ulps may differ there; the largest difference is printed);
- `sawmill verify --expected` holds every emitted target (Go, C, SQLite,
  and PostgreSQL when SAWMILL_POSTGRES_DSN is set) to the interpreter
  and to scikit-learn's outputs;

on held-out rows and on probe rows at, and at the float32 and float64
neighbours of, every threshold, with NaN, ±inf, and at every category edge
(unseen, negative, fractional and large codes). Then it checks that what the
exporter refuses is refused with a message naming it. It prints one line per
check and `N passed, N failed`, and exits non-zero on any failure.

Datasets, all shipped inside scikit-learn (no download), cited as their DESCR
texts cite them:

- Breast Cancer Wisconsin (Diagnostic): W.N. Street, W.H. Wolberg and
  O.L. Mangasarian (1993); UCI Machine Learning Repository.
- Wine: Forina, M. et al., PARVUS; UCI Machine Learning Repository.
- Diabetes: Efron, Hastie, Johnstone and Tibshirani, Least Angle Regression,
  Annals of Statistics 32(2), 2004 (load_diabetes(scaled=False): "sex" is
  coded 1 and 2 and serves as a real categorical feature).
- Linnerud: Tenenhaus, M. (1998), La regression PLS: theorie et pratique
  (three outputs: multi-output regression).

To exercise NaN routing, some cells of the real rows are blanked at random
(a fixed seed); the values that remain are the datasets' own.
"""

import csv
import io
import json
import math
import os
import pickle
import subprocess
import sys
import tempfile
import warnings

import numpy as np
import sklearn
from sklearn import datasets
from sklearn.dummy import DummyClassifier, DummyRegressor
from sklearn.ensemble import (ExtraTreesClassifier, ExtraTreesRegressor, GradientBoostingClassifier,
                              GradientBoostingRegressor, HistGradientBoostingClassifier,
                              HistGradientBoostingRegressor, IsolationForest, RandomForestClassifier,
                              RandomForestRegressor)
from sklearn.linear_model import LinearRegression, LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.dirname(HERE)
sys.path.insert(0, os.path.join(REPO, "python"))
import sawmill_export  # noqa: E402

VERSION = tuple(int(p) for p in sklearn.__version__.split(".")[:2])
TOLERANCE = 1e-12
# Models whose emitted code is built and run by `sawmill verify` (about ten
# seconds each): one for each construct the exporter writes (NaN routing and
# the empty set splits of NaN-only splits, several outputs, per-class trees
# with softmax, a scaled logistic, exp, set splits with each category rule).
# The others are held to scikit-learn through the interpreter only.
VERIFY = {"dt-clf-binary", "dt-clf-nan", "rf-reg-multi", "gb-clf-wine", "gb-clf-exponential",
          "hgb-clf-binary-nan", "hgb-reg-poisson", "hgb-reg-categorical-nan", "hgb-clf-categorical"}
PROBE_CAP = 3000  # probe rows per model, drawn evenly from all probes when there are more
warnings.filterwarnings("ignore")


# ---------------------------------------------------------------- data


def breast_cancer():
    d = datasets.load_breast_cancer()
    return d.data.astype(np.float64), d.target, [n.replace(" ", "_") for n in d.feature_names]


def wine():
    d = datasets.load_wine()
    return d.data.astype(np.float64), d.target, [n.replace(" ", "_") for n in d.feature_names]


def diabetes():
    d = datasets.load_diabetes(scaled=False)
    return d.data.astype(np.float64), d.target.astype(np.float64), list(d.feature_names)


def diabetes_categorical():
    """Diabetes with "sex" (column 1, coded 1 and 2) as a categorical feature,
    and age in decades (a code derived from the real ages, 1 to 7) as a
    second one with more levels."""
    X, y, names = diabetes()
    X = X.copy()
    X[:, 0] = np.floor(X[:, 0] / 10.0) - 1  # 0 for ages 19 and under 20, up to 6 for the seventies
    names = list(names)
    names[0] = "age_decade"
    return X, y, names, [0, 1]


def linnerud():
    d = datasets.load_linnerud()
    return d.data.astype(np.float64), d.target.astype(np.float64), list(d.feature_names)


def blank(X, share, seed):
    X = X.copy()
    rng = np.random.RandomState(seed)
    X[rng.rand(*X.shape) < share] = np.nan
    return X


def split(X, y, seed=0):
    rng = np.random.RandomState(seed)
    idx = rng.permutation(len(X))
    cut = int(len(X) * 0.75)
    return X[idx[:cut]], y[idx[:cut]], X[idx[cut:]], y[idx[cut:]]


# ---------------------------------------------------------------- probes


def probe_rows(doc, base, categorical_values=()):
    """Rows putting one split's feature at, and beside, its threshold: the
    threshold, its float64 neighbours, float32(threshold) and its float32
    neighbours; NaN and ±inf; at set splits every listed category and the
    values around category edges."""
    rng = np.random.RandomState(1)
    seen = set()
    rows = []
    for t in doc["trees"]:
        cats = t.get("categories")
        for i, f in enumerate(t["feature"]):
            if f < 0:
                continue
            if cats is not None and cats[i] is not None:
                vals = []
                for c in cats[i]:
                    vals += [c, c - 0.5, c + 0.5, np.nextafter(c, -np.inf), np.nextafter(c, np.inf)]
            else:
                thr = t["threshold"][i]
                t32 = np.float32(thr)
                vals = [thr, np.nextafter(thr, -np.inf), np.nextafter(thr, np.inf), float(t32),
                        float(np.nextafter(t32, np.float32(-np.inf))), float(np.nextafter(t32, np.float32(np.inf)))]
            for v in vals:
                key = (f, float(v))
                if key in seen:
                    continue
                seen.add(key)
                row = base[rng.randint(len(base))].copy()
                row[f] = v
                rows.append(row)
    for f in range(base.shape[1]):
        for v in (np.nan, np.inf, -np.inf, 0.0, -0.0):
            row = base[rng.randint(len(base))].copy()
            row[f] = v
            rows.append(row)
    for f in categorical_values:
        for v in (-1.0, -0.5, -0.0, 0.0, 0.5, 0.99, 1.5, 2.5, 3.0, 7.0, 9.0, 100.0, 254.0, 255.0, 255.5,
                  256.0, 257.0, 258.0, 300.0, 511.0, 513.0, 1e6, 2.0 ** 31, 2.0 ** 32 + 1, 1e20, -256.0, -255.0):
            for _ in range(3):
                row = base[rng.randint(len(base))].copy()
                row[f] = v
                rows.append(row)
    rows = np.array(rows)
    if len(rows) > PROBE_CAP:
        rows = rows[np.linspace(0, len(rows) - 1, PROBE_CAP).astype(int)]
    return rows


def accepted(fn, R):
    """The rows scikit-learn scores (it refuses NaN or inf in some models): rows
    it refuses are left out, one kind at a time."""
    keep = np.ones(len(R), dtype=bool)
    for bad in (np.isnan(R).any(axis=1), np.isinf(R).any(axis=1)):
        try:
            fn(R[bad & keep][:1]) if (bad & keep).any() else None
        except ValueError:
            keep &= ~bad
    return R[keep]


# ---------------------------------------------------------------- sawmill


def num(x):
    x = float(x)
    if math.isnan(x):
        return ""
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(x)


def write_text(path, lines):
    """Write lines atomically: a temporary file in the same folder, then a rename."""
    with open(path + ".tmp", "w", newline="") as fh:
        fh.write("".join(line + "\n" for line in lines))
    os.replace(path + ".tmp", path)


def write_rows(path, names, R):
    write_text(path, [",".join(names)] + [",".join(num(v) for v in r) for r in R])


def write_outputs(path, cols, Y):
    write_text(path, [",".join(cols)] + [",".join(repr(float(v)) for v in r) for r in Y])


def read_floats(text):
    rows = list(csv.reader(io.StringIO(text)))
    head = rows[0]
    return head, [[float(c) for c in r] for r in rows[1:]]


class Check:
    def __init__(self):
        self.passed = self.failed = 0
        self.worst = {}

    def report(self, ok, name, detail=""):
        print("%s %s%s" % ("pass" if ok else "fail", name, ": " + detail if detail else ""), flush=True)
        if ok:
            self.passed += 1
        else:
            self.failed += 1


def compare_model(chk, exe, tmp, name, est, X_test, names, cat_cols=(), verify_targets=None):
    """Pickle est, export it through the command line, and hold sawmill to it."""
    folder = os.path.join(tmp, name)
    os.makedirs(folder)
    pkl = os.path.join(folder, "model.pkl")
    with open(pkl, "wb") as fh:
        pickle.dump(est, fh)
    model = os.path.join(folder, "model.json")
    out = subprocess.run([sys.executable, os.path.join(REPO, "python", "sawmill_export.py"), pkl, "-o", model,
                          "--features", ",".join(names)], capture_output=True, text=True)
    if out.returncode != 0:
        chk.report(False, "%s export" % name, out.stderr.strip())
        return
    with open(model) as fh:
        doc = json.load(fh)
    is_clf = doc["task"] == "classification"
    score = est.predict_proba if is_clf else est.predict
    R = np.vstack([X_test, probe_rows(doc, X_test, cat_cols)])
    R = accepted(score, R)
    R, wrapped = split_wrapped(est, R, cat_cols)
    if len(wrapped):
        # scikit-learn 1.2 casts a category code to uint8 (measured: 258 is
        # category 2); sawmill sends codes >= 256 the way unknown categories
        # and NaN go, which is what scikit-learn does with them after NaN
        # replaces them.
        nan_in = wrapped.copy()
        for f in cat_cols:
            nan_in[nan_in[:, f] >= 256, f] = np.nan
        path = os.path.join(folder, "wrapped.csv")
        write_rows(path, names, wrapped)
        got = subprocess.run([exe, "predict", "--raw", model, path], capture_output=True, text=True)
        _, raw = read_floats(got.stdout)
        want_nan = np.asarray(est._raw_predict(nan_in), dtype=np.float64).reshape(len(wrapped), -1)
        want_cast = np.asarray(est._raw_predict(wrapped), dtype=np.float64).reshape(len(wrapped), -1)
        ok = got.returncode == 0 and np.array_equal(np.array(raw), want_nan)
        chk.report(ok, "%s: %d rows with a category code >= 256 go where NaN goes (scikit-learn's uint8 cast "
                   "sends %d of them elsewhere)" % (name, len(wrapped), int(np.sum(np.any(want_nan != want_cast, axis=1)))),
                   "" if ok else got.stderr.strip() or "sawmill differs from scikit-learn with NaN in their place")
    rows = os.path.join(folder, "rows.csv")
    write_rows(rows, names, R)

    # raw scores, bit for bit
    if hasattr(est, "_raw_predict_init"):  # GradientBoosting*: _raw_predict takes validated float32 rows
        want_raw = np.asarray(est._raw_predict(R.astype(np.float32)), dtype=np.float64)
    elif hasattr(est, "_raw_predict"):
        want_raw = np.asarray(est._raw_predict(R), dtype=np.float64)
    else:
        want_raw = np.asarray(score(R), dtype=np.float64)
    want_raw = want_raw.reshape(len(R), -1)
    got = subprocess.run([exe, "predict", "--raw", model, rows], capture_output=True, text=True)
    if got.returncode != 0:
        chk.report(False, "%s predict --raw" % name, got.stderr.strip())
        return
    _, raw = read_floats(got.stdout)
    raw = np.array(raw)
    same = np.sum(np.all((raw == want_raw) | (np.isnan(raw) & np.isnan(want_raw)), axis=1))
    chk.report(raw.shape == want_raw.shape and same == len(R), "%s predict --raw: %d of %d rows bit for bit (v%d)"
               % (name, same, len(R), doc["sawmill_forest"]),
               "" if same == len(R) else "first differing row %d: sawmill %r, scikit-learn %r" % (
                   first_diff(raw, want_raw), raw[first_diff(raw, want_raw)].tolist(),
                   want_raw[first_diff(raw, want_raw)].tolist()))

    # transformed outputs, within the tolerance
    want = np.asarray(score(R), dtype=np.float64).reshape(len(R), -1)
    got = subprocess.run([exe, "predict", model, rows], capture_output=True, text=True)
    if got.returncode != 0:
        chk.report(False, "%s predict" % name, got.stderr.strip())
        return
    table = list(csv.reader(io.StringIO(got.stdout)))
    k = want.shape[1]
    pred = np.array([[float(c) for c in r[:k]] for r in table[1:]])
    diff = float(np.max(np.abs(pred - want))) if pred.shape == want.shape else math.inf
    exact = int(np.sum(np.all(pred == want, axis=1))) if pred.shape == want.shape else 0
    kind = type(est).__name__
    chk.worst[kind] = max(chk.worst.get(kind, 0.0), diff)
    chk.report(diff <= TOLERANCE, "%s predict: max |diff| %.3g, %d of %d rows bit for bit" % (name, diff, exact, len(R)))
    if is_clf:
        labels = [r[k] for r in table[1:]]
        want_labels = [str(c) for c in est.predict(R)]
        bad = sum(a != b for a, b in zip(labels, want_labels))
        chk.report(bad == 0, "%s predicted classes: %d of %d differ" % (name, bad, len(R)))

    # every target against the interpreter and scikit-learn
    if name not in VERIFY:
        return
    expected = os.path.join(folder, "sklearn.csv")
    write_outputs(expected, table[0][:k], want)
    cmd = [exe, "verify", model, "--data", rows, "--expected", expected, "--tolerance", repr(TOLERANCE), "--require"]
    targets = verify_targets or ["go", "c", "sqlite"]
    if os.environ.get("SAWMILL_POSTGRES_DSN"):
        targets = targets + ["postgres"]
    # C's float variant receives its inputs as float32, so it answers for a
    # different model than scikit-learn's float64-input boosters; it is held
    # to the interpreter by sawmill's own tests, and left out here.
    cmd += ["--target", ",".join(targets), "--variant", "double"]
    got = subprocess.run(cmd, capture_output=True, text=True)
    chk.report(got.returncode == 0, "%s verify --target %s" % (name, ",".join(targets)),
               "" if got.returncode == 0 else (got.stdout[:4000] + got.stderr[-2000:]).strip())


def split_wrapped(est, R, cat_cols):
    """Rows with a category code >= 256 apart, for an estimator whose predictor
    sees the codes themselves (scikit-learn 1.2: no _preprocessor)."""
    if not cat_cols or getattr(est, "_preprocessor", None) is not None:
        return R, R[:0]
    big = np.zeros(len(R), dtype=bool)
    for f in cat_cols:
        big |= R[:, f] >= 256
    return R[~big], R[big]


def first_diff(a, b):
    if a.shape != b.shape:
        return 0
    bad = np.flatnonzero(~np.all((a == b) | (np.isnan(a) & np.isnan(b)), axis=1))
    return int(bad[0]) if len(bad) else 0


# ---------------------------------------------------------------- models


def models():
    """(name, estimator, X_train, y_train, X_test, feature names, categorical columns)."""
    out = []
    Xb, yb, nb = breast_cancer()
    Xw, yw, nw = wine()
    Xd, yd, nd = diabetes()
    Xl, yl, nl = linnerud()
    b = split(Xb, yb)
    w = split(Xw, yw)
    d = split(Xd, yd)
    nan_ok = VERSION >= (1, 4)  # trees learn NaN routing: DecisionTree 1.3, RandomForest 1.4, ExtraTrees 1.6
    bn = split(blank(Xb, 0.05, 3), yb)
    dn = split(blank(Xd, 0.05, 4), yd)

    def add(name, est, data, names, cats=()):
        out.append((name, est, data, names, cats))

    add("dt-clf-binary", DecisionTreeClassifier(random_state=0, max_depth=6), b, nb)
    add("dt-clf-wine-weighted", DecisionTreeClassifier(random_state=0, min_samples_leaf=3, class_weight="balanced"), w, nw)
    add("dt-reg", DecisionTreeRegressor(random_state=0, max_depth=6), d, nd)
    add("dt-reg-multi", DecisionTreeRegressor(random_state=0, max_depth=3), (Xl[:15], yl[:15], Xl[15:], yl[15:]), nl)
    add("rf-clf-wine", RandomForestClassifier(n_estimators=15, random_state=0, max_depth=6), w, nw)
    add("rf-clf-binary", RandomForestClassifier(n_estimators=15, random_state=0, min_samples_leaf=2, max_features=0.5), b, nb)
    add("rf-reg", RandomForestRegressor(n_estimators=10, random_state=0, max_depth=6), d, nd)
    add("rf-reg-multi", RandomForestRegressor(n_estimators=8, random_state=0), (Xl[:15], yl[:15], Xl[15:], yl[15:]), nl)
    add("et-clf-wine", ExtraTreesClassifier(n_estimators=15, random_state=0, max_depth=6), w, nw)
    add("et-reg", ExtraTreesRegressor(n_estimators=10, random_state=0, max_depth=6), d, nd)
    if VERSION >= (1, 3):
        add("dt-clf-nan", DecisionTreeClassifier(random_state=0, max_depth=6), bn, nb)
        add("dt-reg-nan", DecisionTreeRegressor(random_state=0, max_depth=6), dn, nd)
    if nan_ok:
        add("rf-clf-nan", RandomForestClassifier(n_estimators=10, random_state=0, max_depth=6), bn, nb)
        add("rf-reg-nan", RandomForestRegressor(n_estimators=8, random_state=0, max_depth=6), dn, nd)
    if VERSION >= (1, 6):
        add("et-clf-nan", ExtraTreesClassifier(n_estimators=10, random_state=0, max_depth=6), bn, nb)

    gbc = dict(n_estimators=20, max_depth=3, random_state=0)
    log_loss = "log_loss" if VERSION >= (1, 1) else "deviance"
    add("gb-clf-binary", GradientBoostingClassifier(loss=log_loss, learning_rate=0.1, **gbc), b, nb)
    add("gb-clf-wine", GradientBoostingClassifier(loss=log_loss, learning_rate=0.3, subsample=0.8, **gbc), w, nw)
    add("gb-clf-exponential", GradientBoostingClassifier(loss="exponential", learning_rate=0.17, **gbc), b, nb)
    add("gb-clf-init-zero", GradientBoostingClassifier(init="zero", learning_rate=0.1, **gbc), b, nb)
    add("gb-clf-init-prior", GradientBoostingClassifier(init=DummyClassifier(strategy="prior"), **gbc), w, nw)
    add("gb-clf-init-constant", GradientBoostingClassifier(
        init=DummyClassifier(strategy="most_frequent"), **gbc), b, nb)
    for loss in ("squared_error", "absolute_error", "huber", "quantile"):
        add("gb-reg-%s" % loss.replace("_", "-"), GradientBoostingRegressor(
            loss=loss, learning_rate=0.07, alpha=0.8 if loss in ("huber", "quantile") else 0.9, **gbc), d, nd)
    add("gb-reg-init-zero", GradientBoostingRegressor(init="zero", **gbc), d, nd)
    add("gb-reg-init-median", GradientBoostingRegressor(init=DummyRegressor(strategy="median"), **gbc), d, nd)
    add("gb-reg-init-constant", GradientBoostingRegressor(
        init=DummyRegressor(strategy="constant", constant=150.5), **gbc), d, nd)

    hgb = dict(max_iter=25, random_state=0, early_stopping=False, max_depth=8)  # SQL nests CASE 10 deep
    add("hgb-clf-binary-nan", HistGradientBoostingClassifier(learning_rate=0.2, **hgb), bn, nb)
    add("hgb-clf-wine", HistGradientBoostingClassifier(max_leaf_nodes=8, **hgb), w, nw)
    add("hgb-reg-nan", HistGradientBoostingRegressor(**hgb), dn, nd)
    add("hgb-reg-absolute", HistGradientBoostingRegressor(loss="absolute_error", **hgb), d, nd)
    add("hgb-reg-poisson", HistGradientBoostingRegressor(loss="poisson", **hgb), d, nd)
    add("hgb-reg-quantile", HistGradientBoostingRegressor(loss="quantile", quantile=0.3, **hgb), d, nd)
    if VERSION >= (1, 3):
        add("hgb-reg-gamma", HistGradientBoostingRegressor(loss="gamma", **hgb), d, nd)
    Xc, yc, nc, cat = diabetes_categorical()
    c = split(Xc, yc)
    cn = split(blank(Xc, 0.05, 5), yc)
    add("hgb-reg-categorical", HistGradientBoostingRegressor(categorical_features=cat, **hgb), c, nc, cat)
    add("hgb-reg-categorical-nan", HistGradientBoostingRegressor(categorical_features=cat, **hgb), cn, nc, cat)
    # a classifier on the categorical diabetes rows: is the disease progression above its median?
    yk = (yc > np.median(yc)).astype(int)
    ck = split(Xc, yk)
    add("hgb-clf-categorical", HistGradientBoostingClassifier(categorical_features=cat, **hgb), ck, nc, cat)
    return out


def refusals(chk, tmp):
    """What the exporter must refuse, and with which words."""
    Xb, yb, nb = breast_cancer()
    Xd, yd, nd = diabetes()
    Xl, yl, nl = linnerud()
    cases = [
        ("IsolationForest", IsolationForest(n_estimators=5, random_state=0).fit(Xb), nb, "IsolationForest"),
        ("Pipeline", make_pipeline(StandardScaler(), DecisionTreeClassifier()).fit(Xb, yb), nb, "Pipeline"),
        ("LogisticRegression", LogisticRegression(max_iter=50).fit(Xb, yb), nb, "LogisticRegression"),
        ("init LinearRegression", GradientBoostingRegressor(n_estimators=3, init=LinearRegression()).fit(Xd, yd), nd,
         "init estimator LinearRegression"),
        ("init DummyClassifier uniform", GradientBoostingClassifier(
            n_estimators=3, init=DummyClassifier(strategy="uniform", random_state=0)).fit(Xb, yb), nb,
         "init estimator DummyClassifier(strategy='uniform')"),
        ("multi-output classifier", DecisionTreeClassifier().fit(Xl, (yl > np.median(yl, axis=0)).astype(int)), nl,
         "several outputs"),
        ("unfitted", DecisionTreeClassifier(), nb, "not fitted"),
        ("no feature names", DecisionTreeClassifier(max_depth=2).fit(Xb, yb), None, "--features"),
        ("wrong feature count", DecisionTreeClassifier(max_depth=2).fit(Xb, yb), nb[:3], "3 feature names given"),
    ]
    for label, est, names, words in cases:
        try:
            sawmill_export.to_forest(est, feature_names=names)
            chk.report(False, "refuses %s" % label, "no error")
        except sawmill_export.ExportError as e:
            chk.report(words in str(e), "refuses %s: %s" % (label, str(e).splitlines()[0]),
                       "" if words in str(e) else "message lacks %r" % words)
    # from the shell: exit status 2, no traceback, the input never overwritten
    pkl = os.path.join(tmp, "iso.pkl")
    with open(pkl, "wb") as fh:
        pickle.dump(cases[0][1], fh)
    cli = [sys.executable, os.path.join(REPO, "python", "sawmill_export.py")]
    got = subprocess.run(cli + [pkl, "-o", os.path.join(tmp, "iso.json")], capture_output=True, text=True)
    ok = got.returncode == 2 and "Traceback" not in got.stderr and "IsolationForest" in got.stderr
    chk.report(ok, "command line refuses IsolationForest with status 2 and no traceback", "" if ok else got.stderr)
    dt = os.path.join(tmp, "dt.pkl")
    with open(dt, "wb") as fh:
        pickle.dump(DecisionTreeClassifier(max_depth=2).fit(Xb, yb), fh)
    before = open(dt, "rb").read()
    got = subprocess.run(cli + [dt, "-o", dt, "--features", ",".join(nb)], capture_output=True, text=True)
    ok = got.returncode == 2 and open(dt, "rb").read() == before and "refusing to write over it" in got.stderr
    chk.report(ok, "command line refuses to write over the input pickle", "" if ok else got.stderr)
    got = subprocess.run(cli + [dt, "-o", os.path.join(tmp, "dt.json")], capture_output=True, text=True)
    ok = got.returncode == 2 and "--features" in got.stderr and "Traceback" not in got.stderr
    chk.report(ok, "command line asks for --features when the model has no names", "" if ok else got.stderr)


# Models also written as Go test fixtures by --fixtures (source/testdata/sklearn).
FIXTURES = ["dt-clf-binary", "dt-clf-nan", "rf-clf-wine", "rf-reg-multi", "et-reg", "gb-clf-binary", "gb-clf-wine",
            "gb-clf-exponential", "gb-reg-huber", "gb-reg-init-median", "hgb-clf-binary-nan", "hgb-clf-wine",
            "hgb-reg-poisson", "hgb-reg-categorical-nan", "hgb-clf-categorical"]
FIXTURE_ROWS = 400


def write_fixture(root, name, est, X_test, names, cats):
    """One folder of source/testdata/sklearn: model.json from the exporter,
    rows.csv, and expected.csv with scikit-learn's raw scores (raw_j), its
    outputs as sawmill numbers them (out_j: predict_proba, or only the
    probability of the second class for a logistic model; predict for a
    regressor) and, for a classifier, the index of the predicted class."""
    folder = os.path.join(root, "s%d%d-%s" % (VERSION[0], VERSION[1], name))
    os.makedirs(folder, exist_ok=True)
    doc = sawmill_export.save(est, os.path.join(folder, "model.json"), feature_names=names)
    is_clf = doc["task"] == "classification"
    score = est.predict_proba if is_clf else est.predict
    R, _ = split_wrapped(est, accepted(score, np.vstack([X_test, probe_rows(doc, X_test, cats)])), cats)
    if len(R) > FIXTURE_ROWS:
        R = R[np.linspace(0, len(R) - 1, FIXTURE_ROWS).astype(int)]
    if hasattr(est, "_raw_predict_init"):
        raw = est._raw_predict(R.astype(np.float32))
    elif hasattr(est, "_raw_predict"):
        raw = est._raw_predict(R)
    else:
        raw = score(R)
    raw = np.asarray(raw, dtype=np.float64).reshape(len(R), -1)
    out = np.asarray(score(R), dtype=np.float64).reshape(len(R), -1)
    if is_clf and doc["output_transform"] == "logistic":
        out = out[:, 1:]
    cols = ["raw_%d" % j for j in range(raw.shape[1])] + ["out_%d" % j for j in range(out.shape[1])]
    table = np.hstack([raw, out])
    if is_clf:
        cls = {c: i for i, c in enumerate(est.classes_)}
        table = np.hstack([table, np.array([[cls[c]] for c in est.predict(R)], dtype=np.float64)])
        cols.append("class_index")
    write_rows(os.path.join(folder, "rows.csv"), names, R)
    write_outputs(os.path.join(folder, "expected.csv"), cols, table)
    print("wrote %s: %d rows" % (folder, len(R)))


def main():
    chk = Check()
    if sys.argv[1:2] == ["--fixtures"]:
        root = sys.argv[2]
        for name, est, (Xtr, ytr, Xte, yte), names, cats in models():
            if name in FIXTURES:
                write_fixture(root, name, est.fit(Xtr, ytr), Xte, names, cats)
        return 0
    print("scikit-learn %s, numpy %s" % (sklearn.__version__, np.__version__))
    keep = os.environ.get("SAWMILL_SKLEARN_KEEP")  # a folder to leave the models and rows in, for a look
    with tempfile.TemporaryDirectory(prefix="sawmill-skl-") as tmp:
        tmp = keep or tmp
        exe = os.path.join(tmp, "sawmill")
        subprocess.run(["go", "build", "-o", exe, "./cmd/sawmill"], cwd=REPO, check=True)
        only = sys.argv[1:]
        for name, est, (Xtr, ytr, Xte, yte), names, cats in models():
            if only and not any(o in name for o in only):
                continue
            est.fit(Xtr, ytr)
            compare_model(chk, exe, tmp, name, est, Xte, names, cats)
        if not only:
            refusals(chk, tmp)
    print("largest |diff| from scikit-learn %s by estimator: %s" % (
        sklearn.__version__, json.dumps({k: float("%.3g" % v) for k, v in sorted(chk.worst.items())})))
    if chk.passed == 0:
        chk.failed += 1
    print("%d passed, %d failed" % (chk.passed, chk.failed))
    return 1 if chk.failed else 0


if __name__ == "__main__":
    sys.exit(main())
