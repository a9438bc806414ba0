"""The library side of bench/libs: train the benchmark's models on one table,
save each in its library's own format (and as ONNX), write each library's
predictions, and time each library's own batch predictor.

Usage: libs.py DATA.csv OUTDIR [--reps 5] [--batches 1,100,10000]
               [--threads 1,2] [--rf-big-trees 1000] [--rf-big-leaves 0]
               [--single-rows 1000] [--only MODEL,...] [--load]

DATA.csv is bench/train/synth's invented table (label last; it stands for
no real measurement). The models (all seeded):

  xgb     XGBoost, binary:logistic, 500 rounds, max_depth 6, eta 0.1, hist
  lgbm    LightGBM, binary, 500 rounds, num_leaves 63, learning_rate 0.1
  rf      scikit-learn RandomForestClassifier, 100 trees, fully grown
  rfbig   RandomForestClassifier, --rf-big-trees trees (fully grown, or at
          most --rf-big-leaves leaves each when that is not 0)

With --load, a model OUTDIR already holds (from an earlier run with the same
data) is read back instead of trained again, so run.sh can time the library
and sawmill on one model after the other, round after round.

OUTDIR gets MODEL.model (the file sawmill imports: XGBoost JSON, LightGBM
text, or a sawmill document written by python/sawmill_export.py),
MODEL.onnx, MODEL.pkl (a scikit-learn forest, pickled for --load), MODEL.LIB.pred (the library's probability of class 1 per row,
float64 little-endian; LIB is the model's own library or onnx) and rows.bin
(the rows as float64, row after row). Prints one line per timing:

  time MODEL LIB THREADS BATCH NS_PER_ROW

NS_PER_ROW is the best of --reps passes over the rows, scored BATCH rows per
call (at BATCH 1, the first --single-rows rows only), divided by the rows.
Each library is given float32 rows, the type it scores in (XGBoost, ONNX
Runtime and scikit-learn's trees compare float32), except LightGBM, which
takes float64.
"""
import argparse
import os
import pickle
import sys
import time
import warnings

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "..", "python"))


def load(path):
    with open(path) as fh:
        header = fh.readline().strip().split(",")
    data = np.loadtxt(path, delimiter=",", skiprows=1, dtype=str)
    X = data[:, :-1].astype(np.float64)
    labels = sorted(set(data[:, -1]))
    y = (data[:, -1] == labels[-1]).astype(np.int32)
    return header[:-1], X, y, labels


def train_xgb(X, y, out):
    import xgboost as xgb

    d = xgb.DMatrix(X.astype(np.float32), label=y)
    params = dict(objective="binary:logistic", max_depth=6, eta=0.1, tree_method="hist", seed=1, nthread=2)
    bst = xgb.train(params, d, num_boost_round=500)
    bst.save_model(out + ".model.json")
    os.replace(out + ".model.json", out + ".model")
    return bst


def train_lgbm(X, y, out):
    import lightgbm as lgb

    d = lgb.Dataset(X, label=y)
    params = dict(objective="binary", num_leaves=63, learning_rate=0.1, seed=1, num_threads=2, verbose=-1,
                  deterministic=True)
    bst = lgb.train(params, d, num_boost_round=500)
    bst.save_model(out + ".model")
    return bst


def train_rf(X, y, out, trees, leaves, features, labels):
    import sawmill_export
    from sklearn.ensemble import RandomForestClassifier

    rf = RandomForestClassifier(n_estimators=trees, max_features="sqrt", max_leaf_nodes=leaves or None,
                                random_state=1, n_jobs=2)
    rf.fit(X, y)
    sawmill_export.save(rf, out + ".model", feature_names=features, class_names=[str(c) for c in (0, 1)])
    with open(out + ".pkl.tmp", "wb") as fh:
        pickle.dump(rf, fh)
    os.replace(out + ".pkl.tmp", out + ".pkl")
    return rf


def load_model(kind, out):
    """The model an earlier run saved under out, or None when there is none."""
    if kind == "xgb" and os.path.exists(out + ".model"):
        import xgboost as xgb

        with open(out + ".model", "rb") as fh:
            return xgb.Booster(model_file=bytearray(fh.read()))
    if kind == "lgbm" and os.path.exists(out + ".model"):
        import lightgbm as lgb

        return lgb.Booster(model_file=out + ".model")
    if kind in ("rf", "rfbig") and os.path.exists(out + ".pkl"):
        with open(out + ".pkl", "rb") as fh:
            return pickle.load(fh)
    return None


def train(kind, X, y, out, a, features, labels):
    """Trains kind on X, y, saves it under out with its ONNX form."""
    if kind == "xgb":
        model = train_xgb(X, y, out)
    elif kind == "lgbm":
        model = train_lgbm(X, y, out)
    elif kind == "rf":
        model = train_rf(X, y, out, 100, 0, features, labels)
    else:
        model = train_rf(X, y, out, a.rf_big_trees, a.rf_big_leaves, features, labels)
    to_onnx(kind, model, X.shape[1], out)
    return model


def to_onnx(kind, model, nfeat, out):
    from onnxmltools.convert.common.data_types import FloatTensorType

    types = [("input", FloatTensorType([None, nfeat]))]
    if kind == "xgb":
        import onnxmltools

        m = onnxmltools.convert_xgboost(model, initial_types=types, target_opset=15)
    elif kind == "lgbm":
        import onnxmltools

        m = onnxmltools.convert_lightgbm(model, initial_types=types, target_opset=15, zipmap=False)
    else:
        from skl2onnx import to_onnx as skl_to_onnx

        m = skl_to_onnx(model, X=np.zeros((1, nfeat), dtype=np.float32), options={"zipmap": False},
                        target_opset={"": 15, "ai.onnx.ml": 3})
    with open(out + ".onnx", "wb") as fh:
        fh.write(m.SerializeToString())


def predictors(kind, model, path, threads):
    """Each library's own batch call on float32 rows (float64 for LightGBM),
    returning the probability of class 1, at the given thread count."""
    import onnxruntime as ort

    so = ort.SessionOptions()
    so.intra_op_num_threads = threads
    so.inter_op_num_threads = 1
    sess = ort.InferenceSession(path + ".onnx", so, providers=["CPUExecutionProvider"])
    in_name = sess.get_inputs()[0].name
    out_name = sess.get_outputs()[-1].name
    if kind == "rf" and sess.get_outputs()[0].name == out_name:
        out_name = sess.get_outputs()[1].name

    def onnx_fn(x):
        return np.asarray(sess.run([out_name], {in_name: x})[0])[:, -1]

    if kind == "xgb":
        model.set_param({"nthread": threads})
        own = ("xgboost", lambda x: model.inplace_predict(x), np.float32)
    elif kind == "lgbm":
        own = ("lightgbm", lambda x: model.predict(x, num_threads=threads), np.float64)
    else:
        model.n_jobs = threads
        own = ("sklearn", lambda x: model.predict_proba(x)[:, 1], np.float32)
    return [own, ("onnx", onnx_fn, np.float32)]


def time_one(fn, X, batch, reps, single_rows):
    n = len(X) if batch > 1 else min(single_rows, len(X))
    chunks = [np.ascontiguousarray(X[i:i + batch]) for i in range(0, n, batch)]
    best = float("inf")
    for _ in range(reps):
        t0 = time.perf_counter()
        for c in chunks:
            fn(c)
        best = min(best, time.perf_counter() - t0)
    return best / n * 1e9


def main():
    # scikit-learn 1.9.1 warns on every predict_proba of a forest whose n_jobs
    # was set after fitting (its joblib configuration): noise, not a fault.
    warnings.filterwarnings("ignore", message=".*sklearn.utils.parallel.delayed.*")
    ap = argparse.ArgumentParser()
    ap.add_argument("data")
    ap.add_argument("outdir")
    ap.add_argument("--reps", type=int, default=5)
    ap.add_argument("--batches", default="1,100,10000")
    ap.add_argument("--threads", default="1,2")
    ap.add_argument("--rf-big-trees", type=int, default=1000)
    ap.add_argument("--rf-big-leaves", type=int, default=0)
    ap.add_argument("--single-rows", type=int, default=1000)
    ap.add_argument("--only", default="xgb,lgbm,rf,rfbig")
    ap.add_argument("--load", action="store_true", help="reuse the models OUTDIR holds")
    a = ap.parse_args()
    features, X, y, labels = load(a.data)
    X.astype("<f8").tofile(os.path.join(a.outdir, "rows.bin"))
    import lightgbm
    import onnxruntime
    import sklearn
    import xgboost

    print("versions xgboost %s lightgbm %s scikit-learn %s onnxruntime %s" % (
        xgboost.__version__, lightgbm.__version__, sklearn.__version__, onnxruntime.__version__), flush=True)
    for kind in a.only.split(","):
        out = os.path.join(a.outdir, kind)
        model = load_model(kind, out) if a.load else None
        if model is None:
            model = train(kind, X, y, out, a, features, labels)
        for lib, fn, dt in predictors(kind, model, out, 2):
            np.asarray(fn(X.astype(dt)), dtype="<f8").tofile("%s.%s.pred" % (out, lib))
        for t in [int(v) for v in a.threads.split(",")]:
            for lib, fn, dt in predictors(kind, model, out, t):
                Xd = X.astype(dt)
                for b in [int(v) for v in a.batches.split(",")]:
                    ns = time_one(fn, Xd, b, a.reps, a.single_rows)
                    print("time %s %s %d %d %.1f" % (kind, lib, t, b, ns), flush=True)


if __name__ == "__main__":
    main()
