#!/usr/bin/env python3
"""Train fresh scikit-learn models, write them as PMML with the installed
sklearn2pmml, score them with the installed jpmml_evaluator, and check
sawmill's PMML reader against them.

Run from the repository with the Python of python/requirements.txt (Java 17
must be on the PATH):

    python scripts/pmml_live_check.py [--seed N] [--keep DIR]

It writes every model of scripts/pmml_fixtures.py (same datasets, estimators,
hand-written documents and probe rows, a different seed) into a temporary
folder, then runs

    SAWMILL_PMML_LIVE=<folder> go test ./source -run '^TestPMMLLive$' -v

which holds sawmill's outputs to the evaluator's, bit for bit where the
fixture's bound is 0. It prints "N passed, N failed" and exits non-zero when
any model fails, so a release of either tool that changes what it writes or
computes is caught.
"""

import argparse
import os
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import pmml_fixtures  # noqa: E402
import live_go_test  # noqa: E402


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=11, help="training seed (the committed fixtures use 7)")
    ap.add_argument("--keep", help="write the models here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "models")
        pmml_fixtures.build(out, seed=a.seed, quiet=True)
        models = len([d for d in os.listdir(out) if os.path.isfile(os.path.join(out, d, "model.pmml"))])
        import sklearn2pmml
        import jpmml_evaluator
        label = f"sklearn2pmml {sklearn2pmml.__version__}, jpmml_evaluator {jpmml_evaluator.__version__}"
        sys.exit(live_go_test.run("TestPMMLLive", "SAWMILL_PMML_LIVE", out, models, label))

if __name__ == "__main__":
    main()
