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
import re
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import pmml_fixtures  # noqa: E402

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=11, help="training seed (the committed fixtures use 7)")
    ap.add_argument("--keep", help="write the models here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "models")
        pmml_fixtures.build(out, seed=a.seed, quiet=True)
        models = len([d for d in os.listdir(out) if os.path.isfile(os.path.join(out, d, "model.pmml"))])
        env = dict(os.environ, SAWMILL_PMML_LIVE=os.path.abspath(out))
        p = subprocess.run(
            ["go", "test", "./source", "-count=1", "-run", "^TestPMMLLive$", "-v"],
            cwd=ROOT, env=env, capture_output=True, text=True,
        )
    log = p.stdout + p.stderr
    passed = len(re.findall(r"^\s+--- PASS: TestPMMLLive/", log, re.M))
    failed = len(re.findall(r"^\s+--- FAIL: TestPMMLLive/", log, re.M))
    if p.returncode != 0 or passed + failed != models:
        sys.stdout.write(log)
        failed = max(failed, models - passed)
    import sklearn2pmml
    import jpmml_evaluator
    print(f"sklearn2pmml {sklearn2pmml.__version__}, jpmml_evaluator {jpmml_evaluator.__version__}: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
