"""The Go half of a live check: run one Go test over freshly trained models
and print the plain "N passed, N failed" line.

A live check (scripts/*_live_check.py) trains models with the installed
library into a folder, then calls run() with the name of the Go test that
reads the folder named by an environment variable; each model is one
subtest, so a subtest that did not run counts as failed.
"""

import os
import re
import subprocess
import sys

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def run(test, env_var, folder, models, label):
    """Runs go test ./source -run ^test$ with env_var=folder; prints the
    result line, naming label (the library and its version), and returns
    the exit status: 1 when any of the models failed or did not run."""
    env = dict(os.environ, **{env_var: os.path.abspath(folder)})
    p = subprocess.run(
        ["go", "test", "./source", "-count=1", "-run", f"^{test}$", "-v"],
        cwd=ROOT, env=env, capture_output=True, text=True,
    )
    log = p.stdout + p.stderr
    passed = len(re.findall(rf"^\s+--- PASS: {test}/", log, re.M))
    failed = len(re.findall(rf"^\s+--- FAIL: {test}/", log, re.M))
    if p.returncode != 0 or passed + failed != models:
        sys.stdout.write(log)
        failed = max(failed, models - passed)
    print(f"{label}: {passed} passed, {failed} failed")
    return 1 if failed else 0


def main(doc, fixtures, test, env_var, library):
    """The whole live check: parses --seed and --keep, trains the models of
    the fixtures module (its build(out, seed, quiet) and MODELS) with a seed
    other than the committed fixtures', and runs the Go test over them;
    library names the Python module whose version the result line gives."""
    import argparse
    import importlib
    import tempfile

    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--seed", type=int, default=11, help="training seed (the committed fixtures use 7)")
    ap.add_argument("--keep", help="write the models here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "models")
        fixtures.build(out, seed=a.seed, quiet=True)
        version = importlib.import_module(library).__version__
        sys.exit(run(test, env_var, out, len(fixtures.MODELS), f"{library} {version}"))
