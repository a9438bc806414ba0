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

import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import live_go_test  # noqa: E402
import spark_fixtures  # noqa: E402

if __name__ == "__main__":
    live_go_test.main(__doc__, spark_fixtures, "TestSparkLive", "SAWMILL_SPARK_LIVE", "pyspark")
