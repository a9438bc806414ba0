#!/usr/bin/python3
"""Train fresh XGBoost models with the installed library and check that
sawmill reads them exactly: every margin bit for bit, every prediction.

    venv/bin/python scripts/xgboost_live_check.py

It writes the fixtures of scripts/xgboost_fixtures.py (every objective,
dart, early stopping, categorical splits, NaN cells, threshold and category
probes) into a temporary folder, runs the Go fixture test on them
(`go test ./source -run TestXGBoostFixtures` with SAWMILL_XGBOOST_FIXTURES
set), prints one line per model and `N passed, N failed`, and exits non-zero
on any failure, so that a new XGBoost release that changes its file format
or a formula is caught.
"""

import os
import re
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.dirname(HERE)


def main():
    with tempfile.TemporaryDirectory(prefix="sawmill-xgb-") as tmp:
        made = subprocess.run([sys.executable, os.path.join(HERE, "xgboost_fixtures.py"), tmp])
        if made.returncode != 0:
            print("xgboost_live_check: training the models failed")
            print("0 passed, 1 failed")
            return 1
        env = dict(os.environ, SAWMILL_XGBOOST_FIXTURES=tmp)
        go = subprocess.run(
            ["go", "test", "./source", "-run", "^TestXGBoostFixtures$", "-count=1", "-v"],
            cwd=REPO, env=env, capture_output=True, text=True)
        passed = failed = 0
        for line in go.stdout.splitlines():
            m = re.match(r"\s*--- (PASS|FAIL): TestXGBoostFixtures/(\S+)", line)
            if m:
                print("%s %s" % (m.group(1).lower(), m.group(2)))
                if m.group(1) == "PASS":
                    passed += 1
                else:
                    failed += 1
        if go.returncode != 0:
            sys.stdout.write(go.stdout[-20000:])
            sys.stdout.write(go.stderr[-5000:])
            failed = max(failed, 1)
        if passed == 0 and failed == 0:
            failed = 1
        print("%d passed, %d failed" % (passed, failed))
        return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
