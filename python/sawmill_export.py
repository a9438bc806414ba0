#!/usr/bin/env python3
"""Export a fitted scikit-learn tree ensemble as a sawmill model document.

Use it as a module:

    import sawmill_export
    doc = sawmill_export.to_forest(model)                  # the document, a dict
    sawmill_export.save(model, "model.json")               # written atomically

or from the shell, for an estimator saved with pickle or joblib:

    python3 sawmill_export.py MODEL.pkl -o MODEL.json [--features a,b,...] [--classes x,y,...]

It needs only numpy, the standard library and scikit-learn (1.2 and newer:
the attribute names that differ between versions are handled here). The
document follows sawmill's model-file contract (docs/forest-format.md):
version 1 where that suffices, version 2 where the model needs it.

Supported, each with every option that changes a prediction:

- DecisionTreeClassifier / DecisionTreeRegressor, RandomForest* and
  ExtraTrees* (classifier and regressor; regressors of several outputs; the
  NaN routing trees learn, tree_.missing_go_to_left);
- GradientBoostingClassifier / GradientBoostingRegressor (init 'zero', the
  Dummy estimators and one-leaf trees; every loss; the learning rate
  applied to each leaf as scikit-learn's predict_stages does);
- HistGradientBoostingClassifier / HistGradientBoostingRegressor (numeric
  and categorical splits, NaN, unknown and negative categories, every loss).

Anything else is refused with an error that names it (exit status 2 from
the shell). How each rule was established (by reading the installed
scikit-learn source, or by measurement) is said beside the code.
"""

import argparse
import inspect
import json
import math
import os
import pickle
import sys
import tempfile

import numpy as np

__all__ = ["ExportError", "to_forest", "save", "main"]

_INF = float("inf")


class ExportError(Exception):
    """A model or an option the exporter cannot write exactly; the message names it."""


def _sklearn_version():
    import sklearn

    return sklearn.__version__


def _name(est):
    return type(est).__name__


# ---------------------------------------------------------------- names


def _feature_names(est, feature_names):
    n = int(getattr(est, "n_features_in_", 0) or 0)
    if feature_names is None:
        names = getattr(est, "feature_names_in_", None)
        if names is None:
            raise ExportError(
                "%s: the model does not know its feature names (it was fitted on an array, not a DataFrame)\n"
                "hint: name the %d inputs in order: to_forest(model, feature_names=[...]), "
                "or --features a,b,... from the shell" % (_name(est), n))
        names = [str(s) for s in names]
    else:
        names = [str(s) for s in feature_names]
    if n and len(names) != n:
        raise ExportError("%s: %d feature names given, the model has %d inputs" % (_name(est), len(names), n))
    seen = set()
    for s in names:
        if s == "":
            raise ExportError("%s: a feature name is empty" % _name(est))
        if s in seen:
            raise ExportError("%s: feature name %r is given twice" % (_name(est), s))
        seen.add(s)
    return names


def _class_names(est, class_names):
    classes = getattr(est, "classes_", None)
    if classes is None or np.ndim(classes) != 1:
        raise ExportError("%s: a classifier of several outputs is not supported (classes_ is a list of arrays)" % _name(est))
    names = [str(c) for c in classes] if class_names is None else [str(c) for c in class_names]
    if len(names) != len(classes):
        raise ExportError("%s: %d class names given, the model has %d classes" % (_name(est), len(names), len(classes)))
    if len(names) < 2:
        raise ExportError("%s: the model knows one class only; sawmill needs at least two" % _name(est))
    if len(set(names)) != len(names):
        raise ExportError("%s: two classes have the same name %s\nhint: pass class_names (--classes)" % (_name(est), names))
    return names


# ---------------------------------------------------------------- trees


class _Tree:
    """One tree as sawmill's parallel arrays, node ids kept as the source's."""

    def __init__(self, n):
        self.feature = [-1] * n
        self.threshold = [0.0] * n
        self.left = [-1] * n
        self.right = [-1] * n
        self.missing_left = [False] * n
        self.value = [None] * n
        self.categories = None
        self.output = None

    def leaf(self, i, vec):
        self.value[i] = [float(v) for v in vec]

    def numeric(self, i, feature, threshold, left, right, missing_left):
        """A split sending x left when x <= threshold. scikit-learn writes +inf
        when every non-missing value goes left (a split that only separates
        NaN; tree/_splitter.pyx and the hist grower): +inf <= +inf is true there,
        and no finite threshold sends +inf left, so such a node becomes a set
        split with no members and its children swapped, which sends every
        non-missing value (±inf included) the way +inf went."""
        threshold = float(threshold)
        if threshold == _INF:
            self.set_split(i, feature, [], right, left, not missing_left)
            return
        if not math.isfinite(threshold):
            raise ExportError("node %d: threshold is %r, which no split of sawmill can say" % (i, threshold))
        self.feature[i] = int(feature)
        self.threshold[i] = threshold
        self.left[i] = int(left)
        self.right[i] = int(right)
        self.missing_left[i] = bool(missing_left)
        self.value[i] = None

    def set_split(self, i, feature, members, left, right, missing_left):
        if self.categories is None:
            self.categories = [None] * len(self.feature)
        self.categories[i] = sorted(int(c) for c in members)
        self.feature[i] = int(feature)
        self.threshold[i] = 0.0
        self.left[i] = int(left)
        self.right[i] = int(right)
        self.missing_left[i] = bool(missing_left)

    def doc(self, width):
        zero = [0.0] * width
        d = dict(
            feature=self.feature,
            threshold=self.threshold,
            left=self.left,
            right=self.right,
            missing_left=self.missing_left,
            value=[zero if v is None else v for v in self.value],
        )
        if self.categories is not None:
            d["categories"] = self.categories
        if self.output is not None:
            d["output"] = self.output
        return d


def _predict_proba_normalises():
    """Whether DecisionTreeClassifier.predict_proba divides tree_.value by its row
    sum (scikit-learn 1.2, tree/_classes.py) or returns tree_.value as it is
    (newer releases store the fractions in tree_.value). Read from the
    installed source; when that is unavailable, from the version."""
    from sklearn.tree import DecisionTreeClassifier

    try:
        return "normalizer" in inspect.getsource(DecisionTreeClassifier.predict_proba)
    except (OSError, TypeError):
        major, minor = (int(p) for p in _sklearn_version().split(".")[:2])
        return (major, minor) < (1, 4)


def _leaf_proba(tree_, normalise):
    """Per node, what DecisionTreeClassifier.predict_proba gives for a row reaching
    it, with scikit-learn's own numpy operations (so the same float64 results)."""
    proba = tree_.value[:, 0, :].astype(np.float64, copy=True)
    if normalise:
        normalizer = proba.sum(axis=1)[:, np.newaxis]
        normalizer[normalizer == 0.0] = 1.0
        proba /= normalizer
    return proba


def _cart_tree(est, leaf_values):
    """A tree_ of scikit-learn's tree module; leaf_values[i] is the vector of node i.
    The routing is tree/_tree.pyx's: a NaN goes where missing_go_to_left says
    (the attribute exists since 1.3; before, predict refuses NaN, and NaN goes
    right here), otherwise left when float32(x) <= threshold."""
    t = est.tree_
    n = int(t.node_count)
    out = _Tree(n)
    left, right = t.children_left, t.children_right
    mgl = getattr(t, "missing_go_to_left", None)
    for i in range(n):
        if left[i] == -1:
            out.leaf(i, leaf_values[i])
        else:
            out.numeric(i, t.feature[i], t.threshold[i], left[i], right[i],
                        bool(mgl[i]) if mgl is not None else False)
    return out


def _check_tree_model(est):
    if int(getattr(est, "n_outputs_", 1)) != 1 and hasattr(est, "classes_") and np.ndim(est.classes_) != 1:
        raise ExportError("%s: a classifier of several outputs is not supported" % _name(est))


def _forest_doc(est, features, class_names):
    """DecisionTree*, RandomForest*, ExtraTrees*. The forests average as
    ensemble/_forest.py does: predictions summed from zero in tree order
    (n_jobs=None adds them one after another), then divided by the number of
    trees: sawmill's "average". A single tree is an average of one."""
    from sklearn.base import is_classifier

    trees = list(getattr(est, "estimators_", [est]))
    if not trees:
        raise ExportError("%s: the forest has no trees" % _name(est))
    doc = dict(input_precision="float32", combine="average", output_transform="none")
    if is_classifier(est):
        _check_tree_model(est)
        classes = _class_names(est, class_names)
        normalise = _predict_proba_normalises()
        out = [_cart_tree(t, _leaf_proba(t.tree_, normalise)) for t in trees]
        doc.update(task="classification", classes=classes, base_score=[0.0] * len(classes))
        width = len(classes)
    else:
        k = int(getattr(est, "n_outputs_", 1))
        out = [_cart_tree(t, t.tree_.value[:, :, 0].astype(np.float64)) for t in trees]
        doc.update(task="regression", base_score=[0.0] * k)
        if k > 1:
            doc["outputs"] = k
        width = k
    doc["trees"] = [t.doc(width) for t in out]
    return doc


# ---------------------------------------------------------------- gradient boosting

# GradientBoosting's losses: the class of est._loss in 1.2 (ensemble/_gb_losses.py)
# and in newer releases (sklearn/_loss/loss.py), with the transform predict and
# predict_proba apply to the raw score: (output_transform, transform_scale).
_GB_LOSSES = {
    # 1.2: ensemble/_gb_losses.py
    "LeastSquaresError": ("none", 1.0),
    "LeastAbsoluteError": ("none", 1.0),
    "HuberLossFunction": ("none", 1.0),
    "QuantileLossFunction": ("none", 1.0),
    "BinomialDeviance": ("logistic", 1.0),  # expit(raw)
    "MultinomialDeviance": ("softmax", 1.0),  # exp(raw - logsumexp(raw))
    "ExponentialLoss": ("logistic", 2.0),  # 1.2: expit(2 * raw); newer: HalfLogitLink.inverse = expit(2 * raw)
    # newer releases: sklearn/_loss/loss.py
    "HalfSquaredError": ("none", 1.0),
    "AbsoluteError": ("none", 1.0),
    "HuberLoss": ("none", 1.0),
    "PinballLoss": ("none", 1.0),
    "HalfBinomialLoss": ("logistic", 1.0),
    "HalfMultinomialLoss": ("softmax", 1.0),
    "HalfPoissonLoss": ("exp", 1.0),
    "HalfGammaLoss": ("exp", 1.0),
    "HalfTweedieLoss": ("exp", 1.0),
    "HalfTweedieLossIdentity": ("none", 1.0),
}


def _loss_transform(est):
    loss = getattr(est, "_loss", None)
    name = type(loss).__name__
    if name not in _GB_LOSSES:
        raise ExportError("%s: loss %s (%r) is not supported" % (_name(est), name, getattr(est, "loss", None)))
    return _GB_LOSSES[name]


def _constant_init(est):
    """The raw score GradientBoosting* starts from. scikit-learn computes it per
    row from init_ (ensemble/_gb.py, _raw_predict_init); sawmill has one base
    score, so init_ must predict a constant: 'zero', a Dummy estimator
    (strategies that do not draw at random), or a tree of one leaf. The value
    is then scikit-learn's own computation on one row."""
    init = est.init_
    if isinstance(init, str):
        if init != "zero":
            raise ExportError("%s: init %r is not supported" % (_name(est), init))
    else:
        kind = _name(init)
        constant = False
        if kind in ("DummyRegressor",):
            constant = True
        elif kind == "DummyClassifier":
            constant = getattr(init, "strategy", None) in ("prior", "most_frequent", "constant")
        elif hasattr(init, "tree_"):
            constant = int(init.tree_.node_count) == 1
        if not constant:
            raise ExportError(
                "%s: init estimator %s%s does not predict a constant, and sawmill's base score is one number per output\n"
                "hint: use init=None (a DummyEstimator), 'zero', or a constant estimator"
                % (_name(est), kind, "(strategy=%r)" % init.strategy if hasattr(init, "strategy") else ""))
    x0 = np.zeros((1, int(est.n_features_in_)), dtype=np.float64)
    raw = np.asarray(est._raw_predict_init(x0), dtype=np.float64)
    return [float(v) for v in raw[0]]


def _gb_doc(est, features, class_names):
    """GradientBoosting*: ensemble/_gradient_boosting.pyx predict_stages adds
    `scale * value` to the raw score for each tree, stage by stage and class by
    class, scale being the learning rate: each leaf is multiplied (one float64
    rounding) and the products summed from the init score. sawmill's "sum"
    with leaves lr*value and base_score the init score is that, bit for bit.
    Inputs are float32 (DTYPE) as for the trees."""
    from sklearn.base import is_classifier

    transform, scale = _loss_transform(est)
    stages = est.estimators_
    k = stages.shape[1]
    lr = float(est.learning_rate)
    base = _constant_init(est)
    trees = []
    for s in range(stages.shape[0]):
        for j in range(k):
            reg = stages[s, j]
            vals = reg.tree_.value[:, 0, 0]
            t = _cart_tree(reg, [[lr * float(v)] for v in vals])
            if k > 1:
                t.output = j
            trees.append(t)
    doc = dict(input_precision="float32", combine="sum", output_transform=transform, base_score=base)
    if scale != 1.0:
        doc["transform_scale"] = scale
    if is_classifier(est):
        classes = _class_names(est, class_names)
        doc.update(task="classification", classes=classes)
        if len(classes) == 2 and transform != "logistic":
            raise ExportError("%s: a two-class model with loss %s is not supported" % (_name(est), type(est._loss).__name__))
    else:
        doc["task"] = "regression"
        if transform != "none" and transform != "exp":
            raise ExportError("%s: loss %s does not suit a regressor" % (_name(est), type(est._loss).__name__))
    if len(base) != k:
        raise ExportError("%s: the init score has %d entries, the model %d outputs" % (_name(est), len(base), k))
    doc["trees"] = [t.doc(1) for t in trees]
    return doc


# ---------------------------------------------------------------- histogram gradient boosting

_LINKS = {
    "IdentityLink": "none",
    "LogLink": "exp",
    "LogitLink": "logistic",
    "MultinomialLogit": "softmax",
    "SymmetricMultinomialLogit": "softmax",
}


def _bits(row):
    """The members of one 256-bit bitset row (8 uint32 words, utils/_bitset.pyx)."""
    out = []
    for w, word in enumerate(np.asarray(row, dtype=np.uint64)):
        word = int(word)
        for b in range(32):
            if word >> b & 1:
                out.append(32 * w + b)
    return out


def _hgb_categories(est):
    """Per feature index the trees split on: None for a numeric feature, else
    (the input column, the list mapping a code to the raw value that arrives in
    X, the codes scikit-learn knows), plus the category_match rule.

    Newer releases (a _preprocessor attribute that is not None: a
    ColumnTransformer putting an OrdinalEncoder's columns first) encode each
    categorical column: a raw value seen in training becomes its index in the
    encoder's categories_, anything else NaN, which the trees send the missing
    way. sawmill then lists raw values and matches them exactly.

    scikit-learn 1.2 (no preprocessor) bins the raw values themselves (integers
    in [0, max_bins)), and its predictor (ensemble/_hist_gradient_boosting/
    _predictor.pyx) sends a negative value the missing way and casts any other
    to uint8 before looking it up: measured, -5e-324 and -0.5 go the missing
    way, 3.5 is category 3 and 259 is category 3. That is "floor" below 256;
    codes of 256 and more, which fit() never accepts, sawmill sends the
    missing way, as unknown categories go (a C cast past uint8's range has
    no value to reproduce)."""
    n = int(est.n_features_in_)
    pre = getattr(est, "_preprocessor", None)
    if pre is not None:
        mask = np.asarray(est.is_categorical_, dtype=bool)
        cat_cols = list(np.flatnonzero(mask))
        num_cols = list(np.flatnonzero(~mask))
        names = [tr[0] for tr in pre.transformers_]
        if names[:2] != ["encoder", "numerical"] or any(
                tr[0] not in ("encoder", "numerical", "remainder") or (tr[0] == "remainder" and tr[1] != "drop")
                for tr in pre.transformers_):
            raise ExportError("%s: a preprocessor of %s is not supported" % (_name(est), names))
        enc = pre.named_transformers_["encoder"]
        cols = cat_cols + num_cols
        info = []
        for j, col in enumerate(cols):
            if j < len(cat_cols):
                raw = []
                for c in enc.categories_[j]:
                    try:
                        f = float(c)
                    except (TypeError, ValueError):
                        raise ExportError(
                            "%s: categorical feature %d has the category %r, which is not a number\n"
                            "hint: encode it as integer codes before fitting" % (_name(est), col, c))
                    if math.isnan(f):
                        continue  # NaN is the missing value, not a category
                    if not (f >= 0 and f < 2 ** 31 and f == int(f)):
                        raise ExportError(
                            "%s: categorical feature %d has the category %r; sawmill's set splits list integers in [0, 2^31)\n"
                            "hint: recode the categories as such integers" % (_name(est), col, c))
                    raw.append(int(f))
                info.append((int(col), raw, set(range(len(raw)))))
            else:
                info.append(None)
        remap = [int(c) for c in cols]
        return info, remap, "exact"
    is_cat = getattr(est, "is_categorical_", None)
    info = [None] * n
    if is_cat is not None and np.any(is_cat):
        known_bitsets, f_idx_map = est._bin_mapper.make_known_categories_bitsets()
        for f in np.flatnonzero(is_cat):
            known = set(_bits(known_bitsets[f_idx_map[f]]))
            info[f] = (int(f), list(range(256)), known)
    return info, list(range(n)), "floor"


def _hgb_tree(pred, info, remap):
    """One TreePredictor. Routing as _predictor.pyx, _predict_one_from_raw_data:
    NaN goes by missing_go_to_left; a numeric node sends x left when
    x <= num_threshold (float64 inputs); a categorical node sends x left when
    its code is in the node's left bitset, right when the code is known, and
    the missing way otherwise (unknown categories, and negative values in
    releases that test data_val < 0).

    A set split of sawmill sends its members left and everything else
    (unknown values, negatives, ±inf) right, missing values by missing_left.
    So a node whose missing values go right lists the left categories as they
    are; one whose missing values go left lists the known categories that go
    right, with its children swapped: either way, whatever is not listed goes
    the missing way, as in scikit-learn."""
    nodes = pred.nodes
    n = len(nodes)
    out = _Tree(n)
    bitsets = getattr(pred, "raw_left_cat_bitsets", None)
    for i in range(n):
        nd = nodes[i]
        if nd["is_leaf"]:
            out.leaf(i, [float(nd["value"])])
            continue
        fi = int(nd["feature_idx"])
        col = remap[fi]
        mgl = bool(nd["missing_go_to_left"])
        left, right = int(nd["left"]), int(nd["right"])
        if "is_categorical" in nodes.dtype.names and nd["is_categorical"]:
            cat = info[fi]
            if cat is None:
                raise ExportError("node %d: a categorical split on feature %d, which the model does not list as categorical" % (i, col))
            _, raw_of_code, known = cat
            left_codes = set(_bits(bitsets[int(nd["bitset_idx"])]))
            if not mgl:
                members = [raw_of_code[c] for c in left_codes if c < len(raw_of_code)]
                out.set_split(i, col, members, left, right, False)
            else:
                members = [raw_of_code[c] for c in known - left_codes if c < len(raw_of_code)]
                out.set_split(i, col, members, right, left, False)
        else:
            out.numeric(i, col, nd["num_threshold"], left, right, mgl)
    return out


def _hgb_doc(est, features, class_names):
    """HistGradientBoosting*: gradient_boosting.py _raw_predict starts from
    zeros, adds _baseline_prediction, then each predictor's output in
    iteration order, one column per class (learning rate already in the
    leaves); inputs are float64 (X_DTYPE). sawmill's "sum" from base_score
    adds the same numbers in the same order (0 + b is b)."""
    from sklearn.base import is_classifier

    link = type(getattr(est._loss, "link", None)).__name__
    if link not in _LINKS:
        raise ExportError("%s: loss %s with link %s is not supported" % (_name(est), type(est._loss).__name__, link))
    transform = _LINKS[link]
    k = int(est.n_trees_per_iteration_)
    base = [float(v) for v in np.asarray(est._baseline_prediction, dtype=np.float64).ravel()]
    if len(base) != k:
        raise ExportError("%s: baseline prediction has %d entries, the model %d outputs" % (_name(est), len(base), k))
    info, remap, match = _hgb_categories(est)
    trees = []
    for it in est._predictors:
        for j, pred in enumerate(it):
            t = _hgb_tree(pred, info, remap)
            if k > 1:
                t.output = j
            trees.append(t)
    doc = dict(input_precision="float64", combine="sum", output_transform=transform, base_score=base)
    if any(t.categories is not None for t in trees):
        doc["category_match"] = match
    if is_classifier(est):
        doc.update(task="classification", classes=_class_names(est, class_names))
    else:
        doc["task"] = "regression"
        if transform not in ("none", "exp"):
            raise ExportError("%s: link %s does not suit a regressor" % (_name(est), link))
    doc["trees"] = [t.doc(1) for t in trees]
    return doc


# ---------------------------------------------------------------- the document

_KINDS = {
    "DecisionTreeClassifier": _forest_doc,
    "DecisionTreeRegressor": _forest_doc,
    "ExtraTreeClassifier": _forest_doc,
    "ExtraTreeRegressor": _forest_doc,
    "RandomForestClassifier": _forest_doc,
    "RandomForestRegressor": _forest_doc,
    "ExtraTreesClassifier": _forest_doc,
    "ExtraTreesRegressor": _forest_doc,
    "GradientBoostingClassifier": _gb_doc,
    "GradientBoostingRegressor": _gb_doc,
    "HistGradientBoostingClassifier": _hgb_doc,
    "HistGradientBoostingRegressor": _hgb_doc,
}

_REFUSED = {
    "IsolationForest": (
        "IsolationForest: score_samples is -2^(-E[h(x)]/c(n)), and sawmill's model format 2 has no transform "
        "that gives a negated power of two (exp gives e^z, and nothing negates after it), so it cannot be "
        "exported exactly"),
    "Pipeline": "Pipeline: export the fitted tree model inside it (pipeline[-1]) and apply the preprocessing steps before sawmill",
}

_V2_KEYS = ("accumulate", "transform_scale", "outputs", "category_match", "missing_value")


def to_forest(estimator, feature_names=None, class_names=None):
    """The sawmill model document (a dict ready for json.dump) for a fitted
    scikit-learn tree model. Raises ExportError naming what is not supported."""
    kind = _name(estimator)
    if kind in _REFUSED:
        raise ExportError(_REFUSED[kind])
    if kind not in _KINDS:
        raise ExportError("%s: not a supported estimator\nhint: supported are %s" % (kind, ", ".join(sorted(_KINDS))))
    if not hasattr(estimator, "n_features_in_"):
        raise ExportError("%s: the estimator is not fitted" % kind)
    features = _feature_names(estimator, feature_names)
    try:
        body = _KINDS[kind](estimator, features, class_names)
    except ExportError as e:
        msg = str(e)
        raise ExportError(msg if msg.startswith(kind) else "%s: %s" % (kind, msg)) from None
    v2 = any(k in body for k in _V2_KEYS) or body["output_transform"] not in ("none", "logistic", "softmax") or any(
        "categories" in t or "output" in t for t in body["trees"])
    doc = dict(sawmill_forest=2 if v2 else 1, task=body["task"], features=features)
    if body["task"] == "classification":
        doc["classes"] = body["classes"]
    for key in ("input_precision", "combine", "output_transform") + _V2_KEYS + ("base_score", "trees"):
        if key in body:
            doc[key] = body[key]
    if doc.get("output_transform") == "logistic" and body["task"] == "classification" and len(doc["base_score"]) != 1:
        raise ExportError("%s: BUG: a logistic model with %d outputs" % (kind, len(doc["base_score"])))
    doc["provenance"] = dict(
        trainer="scikit-learn %s %s" % (_sklearn_version(), kind),
        exporter="python/sawmill_export.py",
        params=_params(estimator),
    )
    return doc


def _params(est):
    out = {}
    for k, v in sorted(est.get_params(deep=False).items()):
        if v is None or isinstance(v, (bool, int, str)) or (isinstance(v, float) and math.isfinite(v)):
            out[k] = v
        else:
            out[k] = repr(v) if len(repr(v)) < 200 else type(v).__name__
    return out


def dumps(doc):
    """The document as text: the header keys one a line, each tree on lines of its own."""
    d = lambda v: json.dumps(v, ensure_ascii=False, allow_nan=False)
    lines = ["{"]
    for key, v in doc.items():
        if key == "trees":
            lines.append('  "trees": [')
            for ti, t in enumerate(v):
                parts = ",\n".join("      %s: %s" % (d(k), d(x)) for k, x in t.items())
                lines.append("    {\n" + parts + "\n    }" + ("," if ti < len(v) - 1 else ""))
            lines.append("  ],")
        else:
            lines.append("  %s: %s," % (d(key), d(v)))
    lines[-1] = lines[-1].rstrip(",")
    lines.append("}")
    return "\n".join(lines) + "\n"


def save(estimator, path, feature_names=None, class_names=None, source=None):
    """Write the model document to path atomically: a temporary file in the same
    folder, then a rename. source, the file the estimator was loaded from, is
    never overwritten."""
    doc = to_forest(estimator, feature_names=feature_names, class_names=class_names)
    if source is not None and os.path.exists(path) and os.path.samefile(path, source):
        raise ExportError("%s: this is the model being exported; refusing to write over it\nhint: name another -o file" % path)
    text = dumps(doc)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".sawmill-export-", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return doc


# ---------------------------------------------------------------- command line


def _load(path):
    """An estimator saved by pickle.dump or joblib.dump (joblib only if installed)."""
    try:
        with open(path, "rb") as fh:
            return pickle.load(fh)
    except FileNotFoundError:
        raise ExportError("%s: no such file" % path)
    except Exception as first:
        try:
            import joblib
        except ImportError:
            raise ExportError("%s: not a pickle file (%s)\nhint: a joblib file needs joblib installed" % (path, first))
        try:
            return joblib.load(path)
        except Exception as e:
            raise ExportError("%s: neither pickle nor joblib can load it: %s" % (path, e))


def _split(s):
    return None if s is None else s.split(",")


def main(argv=None, stdout=sys.stdout, stderr=sys.stderr):
    p = argparse.ArgumentParser(
        prog="sawmill_export.py",
        description="Write a fitted scikit-learn tree model (pickle or joblib file) as a sawmill model file.")
    p.add_argument("model", metavar="MODEL.pkl", help="the estimator, saved with pickle.dump or joblib.dump")
    p.add_argument("-o", "--output", required=True, metavar="MODEL.json", help="the sawmill model file to write")
    p.add_argument("--features", metavar="a,b,...", help="input names in column order (default: the model's feature_names_in_)")
    p.add_argument("--classes", metavar="x,y,...", help="class labels in the model's class order (default: its classes_)")
    args = p.parse_args(argv)
    try:
        est = _load(args.model)
        save(est, args.output, feature_names=_split(args.features), class_names=_split(args.classes), source=args.model)
    except ExportError as e:
        print("%s: %s" % (args.model, e) if not str(e).startswith(args.model) else str(e), file=stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
