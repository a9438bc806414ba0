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
