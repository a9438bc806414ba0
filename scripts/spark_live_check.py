#!/usr/bin/env python3
"""Train fresh Spark ML models with the installed PySpark and check sawmill's
reader against them.

Run from the repository with the Python of python/requirements.txt and a
Java 17 on the PATH:

    python scripts/spark_live_check.py [--seed N] [--keep DIR]

It trains every model of scripts/spark_fixtures.py (same datasets, model
kinds, categorical columns, pipeline and probe rows; a different seed) in one
local-mode SparkSession into a temporary folder, then runs

    SAWMILL_SPARK_LIVE=<folder> go test ./source -run '^TestSparkLive$' -v

which holds sawmill's outputs bit for bit (decision trees, random forests)
or within the stated bound (GBT) against what this Spark predicted. It prints
"N passed, N failed" and exits non-zero when any model fails, so a Spark
release that changes its saved format or a formula is caught.
"""

import argparse
import os
import re
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import spark_fixtures  # noqa: E402

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=11, help="training seed (the committed fixtures use 7)")
    ap.add_argument("--keep", help="write the models here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "models")
        spark_fixtures.build(out, seed=a.seed, quiet=True)
        env = dict(os.environ, SAWMILL_SPARK_LIVE=os.path.abspath(out))
        p = subprocess.run(
            ["go", "test", "./source", "-count=1", "-run", "^TestSparkLive$", "-v"],
            cwd=ROOT, env=env, capture_output=True, text=True,
        )
    log = p.stdout + p.stderr
    passed = len(re.findall(r"^\s+--- PASS: TestSparkLive/", log, re.M))
    failed = len(re.findall(r"^\s+--- FAIL: TestSparkLive/", log, re.M))
    models = len(spark_fixtures.MODELS)
    if p.returncode != 0 or passed + failed != models:
        sys.stdout.write(log)
        failed = max(failed, models - passed)
    import pyspark
    print(f"pyspark {pyspark.__version__}: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
