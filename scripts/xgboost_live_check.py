#!/usr/bin/python3
"""Train fresh XGBoost models with the installed library and check that
sawmill reads them exactly: every margin bit for bit, every prediction.

    .venv/bin/python scripts/xgboost_live_check.py

It writes the fixtures of scripts/xgboost_fixtures.py (every objective,
dart, early stopping, categorical splits, NaN cells, threshold and category
probes) into a temporary folder, then checks them two ways: `sawmill predict
--raw` on each model.json and model.ubj must print XGBoost's margins exactly
(every number, compared as doubles), and the Go fixture test (`go test
./source -run TestXGBoostFixtures` with SAWMILL_XGBOOST_FIXTURES set) also
holds the transformed predictions. It prints one line per check and
`N passed, N failed`, and exits non-zero on any failure, so that a new
XGBoost release that changes its file format or a formula is caught.
"""

import csv
import json
import math
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
        passed = failed = 0
        exe = os.path.join(tmp, "sawmill")
        subprocess.run(["go", "build", "-o", exe, "./cmd/sawmill"], cwd=REPO, check=True)
        for name in sorted(os.listdir(tmp)):
            folder = os.path.join(tmp, name)
            if not name.startswith("x") or not os.path.isfile(os.path.join(folder, "margins.csv")):
                continue
            want = read_floats(os.path.join(folder, "margins.csv"))
            with open(os.path.join(folder, "meta.json")) as fh:
                missing = json.load(fh).get("missing")
            for model in ("model.json", "model.ubj"):
                path = os.path.join(folder, model)
                if not os.path.exists(path):
                    continue
                problem = ""
                if missing is not None:  # predicted with missing=V: say so through sawmill import
                    imported = os.path.join(folder, model + ".sawmill.json")
                    out = subprocess.run([exe, "import", path, "-o", imported, "--missing", repr(missing)],
                                         capture_output=True, text=True)
                    problem = out.stderr.strip() if out.returncode else ""
                    path = imported
                if not problem:
                    out = subprocess.run([exe, "predict", "--raw", path, os.path.join(folder, "rows.csv")],
                                         capture_output=True, text=True)
                    problem = out.stderr.strip() if out.returncode else compare(want, parse_floats(out.stdout))
                print("%s predict --raw %s/%s%s" % ("fail" if problem else "pass", name, model, ": " + problem if problem else ""))
                if problem:
                    failed += 1
                else:
                    passed += 1
        env = dict(os.environ, SAWMILL_XGBOOST_FIXTURES=tmp)
        go = subprocess.run(
            ["go", "test", "./source", "-run", "^TestXGBoostFixtures$", "-count=1", "-v"],
            cwd=REPO, env=env, capture_output=True, text=True)
        for line in go.stdout.splitlines():
            m = re.match(r"\s*--- (PASS|FAIL): TestXGBoostFixtures/(\S+)", line)
            if m:
                print("%s go test %s" % (m.group(1).lower(), m.group(2)))
                if m.group(1) == "PASS":
                    passed += 1
                else:
                    failed += 1
        if go.returncode != 0:
            sys.stdout.write(go.stdout[-20000:])
            sys.stdout.write(go.stderr[-5000:])
            failed = max(failed, 1)
        if passed == 0:
            failed = 1
        print("%d passed, %d failed" % (passed, failed))
        return 1 if failed else 0


def parse_floats(text):
    rows = list(csv.reader(text.splitlines()))[1:]
    return [[float(c) if c != "" else math.nan for c in r] for r in rows]


def read_floats(path):
    with open(path) as fh:
        return parse_floats(fh.read())


def compare(want, got):
    """'' when got equals want exactly, else where they first differ."""
    if len(want) != len(got):
        return "%d rows printed, XGBoost scored %d" % (len(got), len(want))
    for i, (w, g) in enumerate(zip(want, got)):
        if len(w) != len(g) or any(a != b and not (math.isnan(a) and math.isnan(b)) for a, b in zip(w, g)):
            return "row %d: sawmill %r, XGBoost %r" % (i + 1, g, w)
    return ""


if __name__ == "__main__":
    sys.exit(main())
