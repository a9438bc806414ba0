#!/usr/bin/env python3
"""Write the Spark ML reference fixtures under source/testdata/spark/.

Run it by hand from the repository with a Python that has the packages pinned
in python/requirements.txt (pyspark 4.0.1, scikit-learn 1.9.1, numpy) and a
Java 17 on the PATH:

    python scripts/spark_fixtures.py

Tests never run this script; they read the committed files. Spark runs in
local mode (local[2]) in one SparkSession for every model. Seeds are fixed,
so the trees are the same on every run; the metadata's timestamp and uid
change, and the part files are renamed to part-00000... so that names do not.

Datasets, all shipped inside scikit-learn (no download); citations as the
datasets' DESCR text in scikit-learn gives them:

- Breast Cancer Wisconsin (Diagnostic): W.N. Street, W.H. Wolberg and
  O.L. Mangasarian, Nuclear feature extraction for breast tumor diagnosis
  (1993); UCI Machine Learning Repository (sklearn.datasets.load_breast_cancer).
  The ten "mean" columns are used.
- Wine: Forina, M. et al., PARVUS - An Extendible Package for Data
  Exploration, Classification and Correlation; UCI Machine Learning
  Repository (sklearn.datasets.load_wine).
- Diabetes: B. Efron, T. Hastie, I. Johnstone and R. Tibshirani, Least Angle
  Regression, Annals of Statistics 32(2) (2004) 407-499
  (sklearn.datasets.load_diabetes, scaled=False). Its "sex" column (two
  values) and its "bmi" column cut into 8 quantile bins are categorical
  features: VectorIndexer (maxCategories=8) turns them into category codes
  and writes Spark's nominal-attribute metadata, so the trees make
  categorical splits on them.

For each model, in source/testdata/spark/<name>/:

- model/        what Spark's save() wrote, less the .crc and _SUCCESS files
                (the reader needs only metadata/part-*, data/part-*.parquet
                and, for ensembles, treesMetadata/part-*.parquet); for a
                PipelineModel, the pipeline's folder with its stages/
- rows.csv      the model's input columns (feature names, or the
                VectorAssembler's input columns for a pipeline): held-out
                rows, then probe rows putting one feature at, just below and
                just above every threshold the model uses, at every category
                code, one past the last code (unseen), -1, 0.5, -0 and +Inf,
                and at NaN (empty cell)
- expected.csv  Spark's own prediction, probability_k (classifiers) and
                rawPrediction_k, one line per row of rows.csv, every number
                in Python's repr (exact round trip)
- meta.json     model kind, dataset, parameters, Spark's version and the BLAS
                implementation Spark's GBT margin (BLAS.nativeBLAS.ddot) used
"""

import glob
import json
import math
import os
import shutil
import sys

import numpy as np
from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "source", "testdata", "spark")

MODELS = [
    # name, estimator class, dataset, params
    ("dt_wine", "DecisionTreeClassifier", "wine", dict(maxDepth=5)),
    ("rf_cancer", "RandomForestClassifier", "cancer", dict(numTrees=12, maxDepth=4)),
    ("gbt_cancer", "GBTClassifier", "cancer", dict(maxIter=15, maxDepth=3)),
    ("dt_diabetes_cat", "DecisionTreeRegressor", "diabetes", dict(maxDepth=5, maxBins=16)),
    ("rf_diabetes_cat", "RandomForestRegressor", "diabetes", dict(numTrees=8, maxDepth=4, maxBins=16)),
    ("gbt_diabetes_cat", "GBTRegressor", "diabetes", dict(maxIter=12, maxDepth=3, maxBins=16)),
    ("rf_wine_cat", "RandomForestClassifier", "wine_cat", dict(numTrees=6, maxDepth=4, maxBins=16)),
    ("pipeline_rf_wine", "RandomForestClassifier", "wine_pipeline", dict(numTrees=5, maxDepth=4)),
]


def session():
    from pyspark.sql import SparkSession

    # Spark's Python workers run "python3" from the PATH unless told: use
    # this interpreter, whose packages (numpy, pyspark) they need.
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)

    s = (
        SparkSession.builder.master("local[2]")
        .appName("sawmill-fixtures")
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.sql.shuffle.partitions", "2")
        .getOrCreate()
    )
    s.sparkContext.setLogLevel("ERROR")
    return s


def dataset(name):
    """Returns feature names, X, y, categorical columns {index: codes}."""
    if name == "cancer":
        d = load_breast_cancer()
        return list(d.feature_names[:10]), d.data[:, :10].astype(float), d.target.astype(float), {}
    if name in ("wine", "wine_pipeline", "wine_cat"):
        d = load_wine()
        names = list(d.feature_names)
        X = d.data.astype(float)
        cats = {}
        if name == "wine_cat":
            # "alcohol" as its rank in 6 quantile bins: an unordered
            # categorical feature of a multiclass model.
            X[:, 0] = quantile_codes(X[:, 0], 6)
            names[0] = "alcohol_bin"
            cats = {0: 6}
        return names, X, d.target.astype(float), cats
    if name == "diabetes":
        d = load_diabetes(scaled=False)
        names = list(d.feature_names)
        X = d.data.astype(float)
        X[:, 1] = X[:, 1] - 1  # sex: 1, 2 -> codes 0, 1
        X[:, 2] = quantile_codes(X[:, 2], 8)  # bmi -> 8 bins
        names[2] = "bmi_bin"
        return names, X, d.target.astype(float), {1: 2, 2: 8}
    raise ValueError(name)


def quantile_codes(col, k):
    edges = np.quantile(col, [i / k for i in range(1, k)])
    return np.searchsorted(edges, col, side="right").astype(float)


def split_rows(n, seed):
    rng = np.random.default_rng(seed)
    idx = rng.permutation(n)
    cut = int(n * 0.75)
    return np.sort(idx[:cut]), np.sort(idx[cut:])


def walk_splits(java_node, out):
    """Collects (feature, threshold or None, categories or None, numCategories) of every split."""
    stack = [java_node]
    while stack:
        n = stack.pop()
        if n.getClass().getSimpleName() != "InternalNode":
            continue
        s = n.split()
        f = s.featureIndex()
        if s.getClass().getSimpleName() == "ContinuousSplit":
            out.append((f, s.threshold(), None, None))
        else:
            out.append((f, None, list(s.leftCategories()), s.numCategories()))
        stack.append(n.leftChild())
        stack.append(n.rightChild())


def probe_rows(X_test, splits, cats):
    rows = [list(r) for r in X_test]
    base = X_test[0]
    seen = set()
    k = 0
    for f, t, _, _ in splits:
        if t is None or (f, t) in seen:
            continue
        seen.add((f, t))
        for v in (t, math.nextafter(t, -math.inf), math.nextafter(t, math.inf)):
            r = list(X_test[k % len(X_test)])
            k += 1
            r[f] = v
            rows.append(r)
    for f in sorted({f for f, _, _, _ in splits}):
        r = list(base)
        r[f] = math.nan
        rows.append(r)
    for f, n in sorted(cats.items()):
        for v in list(range(n)) + [n, n + 1, -1.0, 0.5, -0.0, math.inf, math.nan]:
            for j in range(2):
                r = list(X_test[(k + j) % len(X_test)])
                r[f] = float(v)
                rows.append(r)
            k += 2
    return rows


def rnum(v):
    return "" if isinstance(v, float) and math.isnan(v) else repr(float(v))


def build(out, seed=7, quiet=False, only=None):
    import pyspark
    from pyspark.ml import Pipeline, PipelineModel
    from pyspark.ml import classification as C
    from pyspark.ml import regression as R
    from pyspark.ml.feature import VectorAssembler, VectorIndexer
    from pyspark.ml.linalg import Vectors

    spark = session()
    blas_obj = getattr(getattr(spark._jvm.org.apache.spark.ml.linalg, "BLAS$"), "MODULE$")
    blas = blas_obj.nativeBLAS().getClass().getName()
    os.makedirs(out, exist_ok=True)
    for name, est, ds, params in MODELS:
        if only and name not in only:
            continue
        names, X, y, cats = dataset(ds)
        tr, te = split_rows(len(y), seed)
        cls = getattr(C if est.endswith("Classifier") else R, est)
        kw = dict(params)
        kw["seed"] = seed
        dst = os.path.join(out, name)
        shutil.rmtree(dst, ignore_errors=True)
        os.makedirs(dst)
        mdir = os.path.join(dst, "model")
        if ds == "wine_pipeline":
            df = spark.createDataFrame(
                [tuple(float(v) for v in X[i]) + (float(y[i]),) for i in tr], names + ["label"]
            )
            asm = VectorAssembler(inputCols=names, outputCol="features", handleInvalid="keep")
            pm = Pipeline(stages=[asm, cls(**kw)]).fit(df)
            pm.write().overwrite().save(mdir)
            tree_model = pm.stages[-1]
        else:
            df = spark.createDataFrame([(float(y[i]), Vectors.dense(X[i])) for i in tr], ["label", "raw"])
            if cats:
                # VectorIndexer finds the columns of at most maxCategories
                # distinct values and writes their nominal attributes; the
                # values are already the codes 0..n-1, so it maps each to itself.
                vi = VectorIndexer(inputCol="raw", outputCol="features", maxCategories=8).fit(df)
                got = {int(k): sorted(v.items()) for k, v in vi.categoryMaps.items()}
                want = {f: [(float(c), c) for c in range(n)] for f, n in cats.items()}
                assert got == want, (got, want)
                df = vi.transform(df)
            else:
                df = df.withColumnRenamed("raw", "features")
            tree_model = cls(**kw).fit(df)
            tree_model.write().overwrite().save(mdir)
        strip(mdir)
        java_trees = [t._java_obj for t in tree_model.trees] if hasattr(tree_model, "trees") else [tree_model._java_obj]
        splits = []
        for jt in java_trees:
            walk_splits(jt.rootNode(), splits)
        rows = probe_rows(X[te], splits, cats)
        if ds == "wine_pipeline":
            sdf = spark.createDataFrame(
                [(i,) + tuple(float(v) for v in r) for i, r in enumerate(rows)], ["id"] + names
            )
            pred = pm.transform(sdf)
        else:
            sdf = spark.createDataFrame([(i, Vectors.dense(r)) for i, r in enumerate(rows)], ["id", "features"])
            pred = tree_model.transform(sdf)
        is_cls = est.endswith("Classifier")
        colsel = ["id", "prediction"] + (["probability", "rawPrediction"] if is_cls else [])
        got = sorted(pred.select(*colsel).collect(), key=lambda r: r["id"])
        assert len(got) == len(rows)
        with open(os.path.join(dst, "rows.csv"), "w") as fh:
            fh.write(",".join(names) + "\n")
            for r in rows:
                fh.write(",".join(rnum(v) for v in r) + "\n")
        k = len(got[0]["probability"]) if is_cls else 0
        with open(os.path.join(dst, "expected.csv"), "w") as fh:
            head = ["prediction"] + [f"probability_{j}" for j in range(k)] + [f"rawPrediction_{j}" for j in range(k)]
            fh.write(",".join(head) + "\n")
            for g in got:
                vals = [g["prediction"]]
                if is_cls:
                    vals += list(g["probability"].toArray()) + list(g["rawPrediction"].toArray())
                fh.write(",".join(repr(float(v)) for v in vals) + "\n")
        cat_splits = [(len(c), n) for _, _, c, n in splits if c is not None]
        meta = dict(
            kind=est,
            dataset=ds,
            params=params,
            seed=seed,
            pipeline=ds == "wine_pipeline",
            spark=pyspark.__version__,
            blas=blas,
            splits=len(splits),
            categorical_splits=len(cat_splits),
            categorical_right_sets=sum(1 for l, n in cat_splits if l > n // 2),
        )
        with open(os.path.join(dst, "meta.json"), "w") as fh:
            json.dump(meta, fh, indent=1, sort_keys=True)
            fh.write("\n")
        if not quiet:
            print(f"{name}: {len(rows)} rows, {len(splits)} splits, {len(cat_splits)} categorical", file=sys.stderr)
    spark.stop()


def strip(folder):
    """Removes Spark's .crc and _SUCCESS files and renames part files to part-00000..."""
    for dirpath, _, files in os.walk(folder):
        for f in files:
            if f.endswith(".crc") or f == "_SUCCESS":
                os.remove(os.path.join(dirpath, f))
        parts = sorted(f for f in os.listdir(dirpath) if f.startswith("part-"))
        for i, f in enumerate(parts):
            ext = ".parquet" if f.endswith(".parquet") else ""
            os.rename(os.path.join(dirpath, f), os.path.join(dirpath, f"part-{i:05d}{ext}"))

if __name__ == "__main__":
    build(OUT, only=sys.argv[1:] or None)
