"""What the live checks share: run one Go test over a folder of freshly
written models and count its subtests.

    passed, failed = live_check.go_test("TestLightGBMLive", "SAWMILL_LIGHTGBM_LIVE", folder, models)

runs `go test ./source -run '^TEST$' -v` with the environment variable
pointing at the folder, prints the whole log when anything failed or a model
was not tested, and counts a model that did not report as failed.
"""

import os
import re
import subprocess
import sys

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def go_test(test, env_var, folder, models):
    env = dict(os.environ, **{env_var: os.path.abspath(folder)})
    p = subprocess.run(
        ["go", "test", "./source", "-count=1", "-run", "^%s$" % test, "-v"],
        cwd=ROOT, env=env, capture_output=True, text=True,
    )
    log = p.stdout + p.stderr
    passed = len(re.findall(r"^\s+--- PASS: %s/" % test, log, re.M))
    failed = len(re.findall(r"^\s+--- FAIL: %s/" % test, log, re.M))
    if p.returncode != 0 or passed + failed != models:
        sys.stdout.write(log)
        failed = max(failed, models - passed)
    return passed, failed
