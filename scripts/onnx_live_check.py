#!/usr/bin/env python3
"""Train fresh models, convert them to ONNX with the installed converters, and
check sawmill against ONNX Runtime.

Run from the repository with the Python of python/requirements.txt:

    python scripts/onnx_live_check.py [--seed N] [--keep DIR]

It writes every model of scripts/onnx_fixtures.py (same datasets, converters
and probe rows, different seeds) into a temporary folder, then

1. runs `sawmill predict --raw` on each model and its rows and holds the raw
   scores bit for bit against ONNX Runtime's (one thread, post_transform NONE);
2. runs SAWMILL_ONNX_LIVE=<folder> go test ./source -run '^TestONNXLive$' -v,
   which holds the transformed outputs within the stated bound as well, and
   the labels.

It prints "N passed, N failed" (a model passes when both hold) and exits
non-zero when any model fails, so a release of onnxruntime, skl2onnx,
onnxmltools or a training library that changes what a model computes is
caught.
"""

import argparse
import csv
import io
import json
import os
import re
import struct
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import onnx_fixtures  # noqa: E402

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def bits(v):
    return struct.pack("<d", float(v))


def read_csv(text):
    rows = list(csv.reader(io.StringIO(text)))
    return rows[0], rows[1:]


def check_predict(sawmill, d):
    """sawmill predict --raw against ONNX Runtime's raw scores, bit for bit.
    Returns an error message or None."""
    p = subprocess.run([sawmill, "predict", "--raw", os.path.join(d, "model.onnx"), os.path.join(d, "rows.csv")], capture_output=True, text=True)
    meta = json.load(open(os.path.join(d, "meta.json")))
    if meta.get("error"):
        if p.returncode == 0 or meta["error"] not in p.stderr:
            return f"expected the error {meta['error']!r}, got {p.stderr.strip()[:200]!r}"
        return None
    if p.returncode != 0:
        return p.stderr.strip()[:300]
    head, got = read_csv(p.stdout)
    whead, want = read_csv(open(os.path.join(d, "expected.csv")).read())
    raw = [j for j, h in enumerate(whead) if h.startswith("raw_")]
    if len(got) != len(want):
        return f"{len(got)} rows printed, {len(want)} expected"
    for i, (g, w) in enumerate(zip(got, want)):
        wr = [float(w[j]) for j in raw]
        gr = [float(v) for v in g[: len(head)]]
        if len(gr) == 1 and len(wr) == 2:
            wr = wr[1:]  # one score s for two labels: ONNX Runtime's [-s, s]
        if [bits(v) for v in gr] != [bits(v) for v in wr]:
            return f"row {i + 1}: sawmill {gr}, ONNX Runtime {wr}"
    return None


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=100, help="shift of the training seeds (the committed fixtures use 0)")
    ap.add_argument("--keep", help="write the models here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "models")
        onnx_fixtures.build(out, seed=a.seed, quiet=True)
        sawmill = os.path.join(tmp, "sawmill")
        subprocess.run(["go", "build", "-o", sawmill, "./cmd/sawmill"], cwd=ROOT, check=True)
        names = sorted(os.listdir(out))
        bad = {}
        for n in names:
            err = check_predict(sawmill, os.path.join(out, n))
            if err:
                bad[n] = "sawmill predict: " + err
        env = dict(os.environ, SAWMILL_ONNX_LIVE=os.path.abspath(out))
        p = subprocess.run(["go", "test", "./source", "-count=1", "-run", "^TestONNXLive$", "-v"], cwd=ROOT, env=env, capture_output=True, text=True)
    log = p.stdout + p.stderr
    passed_test = set(re.findall(r"^\s+--- PASS: TestONNXLive/(\S+)", log, re.M))
    for n in names:
        if n not in passed_test and n not in bad:
            bad[n] = "go test TestONNXLive failed"
    if p.returncode != 0:
        sys.stdout.write(log)
    for n, why in sorted(bad.items()):
        print(f"FAIL {n}: {why}")
    import onnxruntime
    import skl2onnx
    import onnxmltools

    print(f"onnxruntime {onnxruntime.__version__}, skl2onnx {skl2onnx.__version__}, onnxmltools {onnxmltools.__version__}: {len(names) - len(bad)} passed, {len(bad)} failed")
    sys.exit(1 if bad or not names else 0)


if __name__ == "__main__":
    main()
