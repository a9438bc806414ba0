#!/usr/bin/env python3
"""Write the PMML fixtures under source/testdata/pmml.

Run from the repository with the Python of python/requirements.txt (it needs
Java 17 for sklearn2pmml and jpmml_evaluator):

    python scripts/pmml_fixtures.py [--out DIR] [--seed N]

Each folder holds model.pmml, rows.csv (the inputs, repr-exact, an empty cell
for a missing value), expected.csv (what jpmml_evaluator 0.16.0 returns for
each row: the class probabilities in the target's class order, or the
predicted value; an empty row where PMML gives no prediction) and meta.json.

Models come from two places:
  - sklearn2pmml writes scikit-learn decision trees, random forests and
    gradient boosting, trained on real data: the UCI breast cancer (Wolberg,
    Street and Mangasarian 1995) and wine (Aeberhard and Forina 1991) sets
    and the diabetes set of Efron, Hastie, Johnstone and Tibshirani (2004),
    as scikit-learn ships them.
  - TreeModels and MiningModels written by hand from the PMML 4.4
    specification (Data Mining Group) for what sklearn2pmml never writes:
    compound predicates, every comparison operator, set predicates, every
    missing-value strategy, missing-value replacement, double and mixed
    fields, votes, Targets on a single tree. Their thresholds and codes are
    values of the wine data.

The rows are held-out rows of the data, plus, for every threshold in the
model, rows at it and beside it: the doubles just below and above, and for a
float field the float32 value, its float32 neighbours and the doubles beside
the midpoints between them (where rounding to float32 changes sides), and
rows with a missing value.

sklearn2pmml 0.133.1 knows scikit-learn up to 1.9.0 and refuses a pickle
labelled 1.9.1; the trees' attributes did not change between the two, so the
estimators are labelled 1.9.0 before conversion (see label_version).
"""

import argparse
import contextlib
import csv
import json
import math
import os
import re
import shutil
import struct
import sys
import tempfile

import numpy as np

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


@contextlib.contextmanager
def silenced(quiet):
    """Sends this process's (and Java's) standard output and error to
    /dev/null while quiet: sklearn2pmml logs every conversion."""
    if not quiet:
        yield
        return
    sys.stdout.flush()
    sys.stderr.flush()
    saved = [os.dup(1), os.dup(2)]
    null = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(null, 1)
        os.dup2(null, 2)
        yield
    finally:
        os.dup2(saved[0], 1)
        os.dup2(saved[1], 2)
        for fd in saved + [null]:
            os.close(fd)


def label_version():
    import sklearn.base
    sklearn.base.__version__ = "1.9.0"


def f32(x):
    return struct.unpack("f", struct.pack("f", x))[0]


def next32(x, up):
    """The float32 neighbour of float32 value x."""
    b = struct.unpack("I", struct.pack("f", x))[0]
    if x == 0:
        return f32(1.401298464324817e-45 if up else -1.401298464324817e-45)
    if (x > 0) == up:
        b += 1
    else:
        b -= 1
    return struct.unpack("f", struct.pack("I", b))[0]


def probes(v, is_float):
    """Values at and beside threshold v."""
    out = {v, math.nextafter(v, math.inf), math.nextafter(v, -math.inf)}
    if is_float:
        w = f32(v)
        for a in (next32(w, False), w, next32(w, True)):
            out.add(a)
        for lo, hi in ((next32(w, False), w), (w, next32(w, True))):
            mid = (lo + hi) / 2
            out |= {mid, math.nextafter(mid, math.inf), math.nextafter(mid, -math.inf)}
    return sorted(x for x in out if math.isfinite(x))


def thresholds(pmml):
    """(field, value) of every predicate with a value, and every Array entry."""
    out = []
    for m in re.finditer(r'<SimplePredicate field="([^"]+)" operator="\w+" value="([^"]+)"', pmml):
        out.append((m.group(1), float(m.group(2))))
    for m in re.finditer(r'<SimpleSetPredicate field="([^"]+)"[^>]*>\s*<Array[^>]*>([^<]*)</Array>', pmml):
        for w in m.group(2).split():
            out.append((m.group(1), float(w.strip('"'))))
    return out


def field_types(pmml):
    return dict(re.findall(r'<DataField name="([^"]+)" optype="\w+" dataType="(\w+)"', pmml))


def make_rows(pmml, features, X, rng, max_probes=400):
    """Held-out rows, threshold probes and rows with missing values."""
    types = field_types(pmml)
    rows = [list(map(float, r)) for r in X]
    idx = {f: i for i, f in enumerate(features)}
    th = sorted(set(thresholds(pmml)))
    rng.shuffle(th)
    extra = []
    for field, v in th:
        if field not in idx:
            continue
        for p in probes(v, types.get(field) == "float"):
            r = list(rows[rng.integers(len(rows))])
            r[idx[field]] = p
            extra.append(r)
    rng.shuffle(extra)
    rows += extra[:max_probes]
    for i in range(min(40, len(X))):
        r = list(rows[i])
        for j in rng.choice(len(features), size=1 + i % 3, replace=False):
            r[j] = math.nan
        rows.append(r)
    return rows


def evaluate(path, features, rows, outputs):
    from jpmml_evaluator import make_evaluator
    ev = make_evaluator(path, backend="jpype").verify()
    out = []
    for r in rows:
        res = ev.evaluate({f: (None if math.isnan(v) else v) for f, v in zip(features, r)})
        vals = [res.get(o) for o in outputs]
        out.append(None if any(v is None for v in vals) else [float(v) for v in vals])
    return out


def write_fixture(out, name, pmml, features, rows, outputs, meta):
    d = os.path.join(out, name)
    os.makedirs(d, exist_ok=True)
    path = os.path.join(d, "model.pmml")
    with open(path, "w") as fh:
        fh.write(pmml)
    want = evaluate(path, features, rows, outputs)
    with open(os.path.join(d, "rows.csv"), "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(features)
        for r in rows:
            w.writerow(["" if math.isnan(v) else repr(v) for v in r])
    with open(os.path.join(d, "expected.csv"), "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(outputs)
        for v in want:
            w.writerow([""] * len(outputs) if v is None else [repr(x) for x in v])
    meta = dict(meta, outputs=outputs, rows=len(rows), nulls=sum(v is None for v in want))
    with open(os.path.join(d, "meta.json"), "w") as fh:
        json.dump(meta, fh, indent=1, sort_keys=True)
        fh.write("\n")


def sk_models(seed):
    from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine
    from sklearn.ensemble import (GradientBoostingClassifier, GradientBoostingRegressor,
                                  RandomForestClassifier, RandomForestRegressor)
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor
    wine, cancer, diabetes = load_wine(), load_breast_cancer(), load_diabetes()
    return [
        ("sk-dt-wine", wine, DecisionTreeClassifier(max_depth=5, random_state=seed)),
        ("sk-dtr-diabetes", diabetes, DecisionTreeRegressor(max_depth=6, random_state=seed)),
        ("sk-rf-cancer", cancer, RandomForestClassifier(n_estimators=8, max_depth=6, random_state=seed)),
        ("sk-rfr-diabetes", diabetes, RandomForestRegressor(n_estimators=8, max_depth=5, random_state=seed)),
        ("sk-gb-wine", wine, GradientBoostingClassifier(n_estimators=8, max_depth=3, random_state=seed)),
        ("sk-gb-cancer", cancer, GradientBoostingClassifier(n_estimators=10, max_depth=3, random_state=seed)),
        ("sk-gbr-diabetes", diabetes, GradientBoostingRegressor(n_estimators=15, max_depth=3, random_state=seed)),
    ]


def build_sklearn(out, seed, quiet):
    from sklearn.model_selection import train_test_split
    from sklearn2pmml import PMMLPipeline, sklearn2pmml
    label_version()
    rng = np.random.default_rng(seed)
    for name, data, est in sk_models(seed):
        X, y = data.data, data.target
        features = ["x%d" % (i + 1) for i in range(X.shape[1])]
        Xtr, Xte, ytr, _ = train_test_split(X, y, test_size=60, random_state=seed)
        p = PMMLPipeline([("model", est)])
        with silenced(quiet):
            p.fit(Xtr, ytr)
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "m.pmml")
            with silenced(quiet):
                sklearn2pmml(p, path)
            with open(path) as fh:
                pmml = fh.read()
        # The timestamp would change every file on every run.
        pmml = re.sub(r"<Timestamp>[^<]*</Timestamp>", "", pmml)
        classifier = hasattr(est, "classes_")
        outputs = ["probability(%d)" % c for c in est.classes_] if classifier else ["y"]
        rows = make_rows(pmml, features, Xte, rng)
        write_fixture(out, name, pmml, features, rows, outputs,
                      {"source": "sklearn2pmml", "estimator": type(est).__name__, "bound": bound_of(est)})
        if not quiet:
            print("wrote", name)


def bound_of(est):
    """The stated bound, in ulps of the largest output magnitude, between
    sawmill and the evaluator (0: bit for bit)."""
    name = type(est).__name__
    if name.startswith("GradientBoosting"):
        # (c/f + sum)·f against sum·f + c, and for classifiers the
        # evaluator's own logistic and softmax formulas.
        return 8
    return 0


# Hand-written models (PMML 4.4; the section of the specification each one
# exercises is named in source/pmml_test.go).

HEAD = """<?xml version="1.0" encoding="UTF-8"?>
<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4">
\t<Header description="written by hand from the PMML 4.4 specification"/>
\t<DataDictionary>
{fields}\t</DataDictionary>
"""


def data_fields(features, types, target):
    s = "".join('\t\t<DataField name="%s" optype="continuous" dataType="%s"/>\n' % (f, types.get(f, "double")) for f in features)
    if target is None:
        s += '\t\t<DataField name="y" optype="continuous" dataType="double"/>\n'
    else:
        s += '\t\t<DataField name="y" optype="categorical" dataType="string">\n'
        s += "".join('\t\t\t<Value value="%s"/>\n' % c for c in target)
        s += "\t\t</DataField>\n"
    return s


def schema(features, extra=None, classes=None):
    extra = extra or {}
    s = '\t\t<MiningSchema>\n\t\t\t<MiningField name="y" usageType="target"/>\n'
    for f in features:
        s += '\t\t\t<MiningField name="%s"%s/>\n' % (f, extra.get(f, ""))
    s += "\t\t</MiningSchema>\n"
    if classes:
        s += "\t\t<Output>\n"
        s += "".join('\t\t\t<OutputField name="probability(%s)" optype="continuous" dataType="double" feature="probability" value="%s"/>\n' % (c, c) for c in classes)
        s += "\t\t</Output>\n"
    return s


def dist(p):
    return "".join('<ScoreDistribution value="%s" recordCount="%s"/>' % (c, n) for c, n in p)


WINE = ["alcohol", "malic_acid", "ash", "magnesium", "proline"]
WINE_COLS = [0, 1, 2, 4, 12]


def hand_models():
    """(name, features, field types, PMML text, outputs)."""
    out = []
    cls = ["a", "b", "c"]
    probs = ["probability(%s)" % c for c in cls]

    # 1. Compound predicates (and, or, xor, surrogate), missingValueStrategy
    # none, noTrueChildStrategy returnLastPrediction, double fields.
    body = """\t<TreeModel functionName="regression" missingValueStrategy="none" noTrueChildStrategy="returnLastPrediction">
{schema}\t\t<Node score="10.5">
\t\t\t<True/>
\t\t\t<Node score="1.25">
\t\t\t\t<CompoundPredicate booleanOperator="and">
\t\t\t\t\t<SimplePredicate field="alcohol" operator="greaterThan" value="13.05"/>
\t\t\t\t\t<SimplePredicate field="proline" operator="lessOrEqual" value="755"/>
\t\t\t\t</CompoundPredicate>
\t\t\t</Node>
\t\t\t<Node score="2.5">
\t\t\t\t<CompoundPredicate booleanOperator="or">
\t\t\t\t\t<SimplePredicate field="malic_acid" operator="lessThan" value="1.73"/>
\t\t\t\t\t<SimplePredicate field="ash" operator="greaterOrEqual" value="2.61"/>
\t\t\t\t\t<SimplePredicate field="magnesium" operator="equal" value="101"/>
\t\t\t\t</CompoundPredicate>
\t\t\t\t<Node score="3.75">
\t\t\t\t\t<CompoundPredicate booleanOperator="xor">
\t\t\t\t\t\t<SimplePredicate field="alcohol" operator="lessOrEqual" value="12.37"/>
\t\t\t\t\t\t<SimplePredicate field="proline" operator="greaterThan" value="520"/>
\t\t\t\t\t</CompoundPredicate>
\t\t\t\t</Node>
\t\t\t\t<Node score="-4.125">
\t\t\t\t\t<CompoundPredicate booleanOperator="surrogate">
\t\t\t\t\t\t<SimplePredicate field="ash" operator="lessOrEqual" value="2.36"/>
\t\t\t\t\t\t<SimplePredicate field="magnesium" operator="lessOrEqual" value="98"/>
\t\t\t\t\t\t<False/>
\t\t\t\t\t</CompoundPredicate>
\t\t\t\t</Node>
\t\t\t</Node>
\t\t\t<Node score="5.0625">
\t\t\t\t<SimplePredicate field="alcohol" operator="notEqual" value="12.37"/>
\t\t\t</Node>
\t\t</Node>
\t</TreeModel>
</PMML>
"""
    out.append(("hand-compound", WINE, {}, HEAD.format(fields=data_fields(WINE, {}, None)) + body.format(schema=schema(WINE)), ["y"], None))

    # 2. missingValueStrategy defaultChild; isMissing, isNotMissing;
    # classification with ScoreDistribution probabilities.
    body = """\t<TreeModel functionName="classification" missingValueStrategy="defaultChild">
{schema}\t\t<Node id="r" defaultChild="n2">
\t\t\t<True/>
\t\t\t<Node id="n1" defaultChild="n11">
\t\t\t\t<SimplePredicate field="proline" operator="greaterThan" value="755"/>
\t\t\t\t<Node id="n11" score="a">
\t\t\t\t\t<SimplePredicate field="alcohol" operator="greaterOrEqual" value="13.05"/>
\t\t\t\t\t{d1}
\t\t\t\t</Node>
\t\t\t\t<Node id="n12" score="b">
\t\t\t\t\t<True/>
\t\t\t\t\t{d2}
\t\t\t\t</Node>
\t\t\t</Node>
\t\t\t<Node id="n2" defaultChild="n22">
\t\t\t\t<True/>
\t\t\t\t<Node id="n21" score="c">
\t\t\t\t\t<SimplePredicate field="malic_acid" operator="isMissing"/>
\t\t\t\t\t{d3}
\t\t\t\t</Node>
\t\t\t\t<Node id="n22" score="b">
\t\t\t\t\t<SimplePredicate field="ash" operator="lessThan" value="2.36"/>
\t\t\t\t\t{d4}
\t\t\t\t</Node>
\t\t\t\t<Node id="n23" score="a">
\t\t\t\t\t<SimplePredicate field="magnesium" operator="isNotMissing"/>
\t\t\t\t\t{d5}
\t\t\t\t</Node>
\t\t\t</Node>
\t\t</Node>
\t</TreeModel>
</PMML>
"""
    ds = dict(d1='<ScoreDistribution value="a" recordCount="30" probability="0.75"/><ScoreDistribution value="b" recordCount="7" probability="0.2"/><ScoreDistribution value="c" recordCount="3" probability="0.05"/>',
              d2=dist([("a", 3), ("b", 17), ("c", 1)]), d3=dist([("a", 1), ("b", 1), ("c", 5)]),
              d4=dist([("a", 2), ("b", 11), ("c", 3)]), d5=dist([("a", 13), ("b", 3), ("c", 7)]))
    out.append(("hand-default-child", WINE, {}, HEAD.format(fields=data_fields(WINE, {}, cls)) + body.format(schema=schema(WINE, classes=cls), **ds), probs, None))

    # 3. missingValueStrategy lastPrediction, noTrueChildStrategy
    # returnLastPrediction, SimpleSetPredicate on integer codes (isIn,
    # isNotIn), equal on a code.
    body = """\t<TreeModel functionName="classification" missingValueStrategy="lastPrediction" noTrueChildStrategy="returnLastPrediction">
{schema}\t\t<Node score="a">
\t\t\t<True/>
\t\t\t{d0}
\t\t\t<Node score="b">
\t\t\t\t<SimpleSetPredicate field="magnesium" booleanOperator="isIn"><Array type="int" n="6">86 88 92 101 112 98</Array></SimpleSetPredicate>
\t\t\t\t{d1}
\t\t\t\t<Node score="c">
\t\t\t\t\t<SimpleSetPredicate field="proline" booleanOperator="isNotIn"><Array type="int" n="4">520 680 1035 1065</Array></SimpleSetPredicate>
\t\t\t\t\t<Node score="a">
\t\t\t\t\t\t<SimplePredicate field="alcohol" operator="lessOrEqual" value="13.05"/>
\t\t\t\t\t\t{d2}
\t\t\t\t\t</Node>
\t\t\t\t\t{d3}
\t\t\t\t</Node>
\t\t\t</Node>
\t\t\t<Node score="c">
\t\t\t\t<SimplePredicate field="magnesium" operator="equal" value="100"/>
\t\t\t\t{d4}
\t\t\t</Node>
\t\t</Node>
\t</TreeModel>
</PMML>
"""
    ds = dict(d0=dist([("a", 10), ("b", 5), ("c", 5)]), d1=dist([("a", 1), ("b", 6), ("c", 3)]),
              d2=dist([("a", 4), ("b", 1), ("c", 2)]), d3=dist([("a", 1), ("b", 1), ("c", 9)]), d4=dist([("a", 0), ("b", 2), ("c", 7)]))
    out.append(("hand-last-prediction-sets", WINE, {}, HEAD.format(fields=data_fields(WINE, {}, cls)) + body.format(schema=schema(WINE, classes=cls), **ds), probs, None))

    # 4. missingValueReplacement, majorityVote of two trees, nullPrediction.
    tree = """\t\t\t<Segment><True/>
\t\t\t\t<TreeModel functionName="classification" missingValueStrategy="nullPrediction">
\t\t\t\t\t<MiningSchema>{fields}</MiningSchema>
\t\t\t\t\t<Node><True/>
\t\t\t\t\t\t<Node score="{s1}"><SimplePredicate field="{f}" operator="lessOrEqual" value="{v}"/>{d1}</Node>
\t\t\t\t\t\t<Node score="{s2}"><True/>{d2}</Node>
\t\t\t\t\t</Node>
\t\t\t\t</TreeModel>
\t\t\t</Segment>
"""
    mf = "".join('<MiningField name="%s"/>' % f for f in WINE)
    segs = (tree.format(fields=mf, f="proline", v="755", s1="b", s2="a", d1=dist([("b", 1)]), d2=dist([("a", 1)])) +
            tree.format(fields=mf, f="alcohol", v="12.37", s1="b", s2="c", d1=dist([("b", 1)]), d2=dist([("c", 1)])) +
            tree.format(fields=mf, f="malic_acid", v="2.36", s1="a", s2="c", d1=dist([("a", 1)]), d2=dist([("c", 1)])))
    body = '\t<MiningModel functionName="classification">\n' + schema(WINE, {"proline": ' missingValueTreatment="asMean" missingValueReplacement="746.89"', "alcohol": ' missingValueReplacement="12.37"'}, cls) + \
        '\t\t<Segmentation multipleModelMethod="majorityVote" missingPredictionTreatment="returnMissing">\n' + segs + "\t\t</Segmentation>\n\t</MiningModel>\n</PMML>\n"
    out.append(("hand-vote-replacement", WINE, {}, HEAD.format(fields=data_fields(WINE, {}, cls)) + body, probs, None))

    # 5. Mixed float and double fields; every comparison on a float field;
    # Targets on a single regression tree.
    types = {"alcohol": "float", "malic_acid": "float", "ash": "double", "magnesium": "float", "proline": "double"}
    body = """\t<TreeModel functionName="regression" missingValueStrategy="none" noTrueChildStrategy="returnLastPrediction">
{schema}\t\t<Targets><Target field="y" rescaleFactor="0.3" rescaleConstant="-1.7"/></Targets>
\t\t<Node score="0.1">
\t\t\t<True/>
\t\t\t<Node score="1.1"><SimplePredicate field="alcohol" operator="lessThan" value="12.37"/></Node>
\t\t\t<Node score="2.3"><SimplePredicate field="alcohol" operator="equal" value="13.05"/></Node>
\t\t\t<Node score="3.7"><SimplePredicate field="malic_acid" operator="greaterOrEqual" value="1.73"/>
\t\t\t\t<Node score="4.9"><SimplePredicate field="ash" operator="lessThan" value="2.36"/></Node>
\t\t\t\t<Node score="6.1"><SimplePredicate field="magnesium" operator="notEqual" value="101"/></Node>
\t\t\t</Node>
\t\t\t<Node score="7.3"><SimplePredicate field="proline" operator="greaterThan" value="755"/></Node>
\t\t</Node>
\t</TreeModel>
</PMML>
"""
    out.append(("hand-mixed-precision", WINE, types, HEAD.format(fields=data_fields(WINE, types, None)) + body.format(schema=schema(WINE)), ["y"], None))
    return out


def build_hand(out, seed, quiet):
    from sklearn.datasets import load_wine
    X = load_wine().data[:, WINE_COLS]
    rng = np.random.default_rng(seed)
    sel = rng.choice(len(X), size=60, replace=False)
    for name, features, _types, pmml, outputs, _ in hand_models():
        rows = make_rows(pmml, features, X[sel], rng)
        write_fixture(out, name, pmml, features, rows, outputs, {"source": "hand", "bound": 0})
        if not quiet:
            print("wrote", name)


def build(out, seed=7, quiet=False):
    os.makedirs(out, exist_ok=True)
    build_sklearn(out, seed, quiet)
    build_hand(out, seed, quiet)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default=os.path.join(ROOT, "source", "testdata", "pmml"))
    ap.add_argument("--seed", type=int, default=7)
    a = ap.parse_args()
    if os.path.isdir(a.out):
        shutil.rmtree(a.out)
    build(a.out, a.seed)


if __name__ == "__main__":
    main()
