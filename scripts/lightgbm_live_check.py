#!/usr/bin/env python3
"""Train fresh LightGBM models with the installed lightgbm and check sawmill's
reader against them.

Run from the repository with the Python of python/requirements.txt:

    python scripts/lightgbm_live_check.py [--seed N] [--keep DIR]

It trains every model of scripts/lightgbm_fixtures.py (same datasets, objectives
and probe rows, a different seed) into a temporary folder, then runs

    SAWMILL_LIGHTGBM_LIVE=<folder> go test ./source -run '^TestLightGBMLive$' -v

which holds sawmill's raw scores bit for bit, and its transformed outputs
within the stated bound, against what this lightgbm predicted. It prints
"N passed, N failed" and exits non-zero when any model fails, so a new
LightGBM release that changes its file format or a formula is caught.
"""

import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import live_go_test  # noqa: E402
import lightgbm_fixtures  # noqa: E402

if __name__ == "__main__":
    live_go_test.main(__doc__, lightgbm_fixtures, "TestLightGBMLive", "SAWMILL_LIGHTGBM_LIVE", "lightgbm")
