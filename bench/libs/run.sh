#!/usr/bin/env bash
# sawmill's emitted C and Go batch paths against the libraries users would
# otherwise call, on the same models and rows, side by side, with ratios.
#
# bench/libs/libs.py (the Python of .venv, pinned by python/requirements.txt)
# trains on the invented table of bench/train/synth (ROWS x 20 features, two
# classes, seeded; it stands for no real measurement): XGBoost (500 rounds,
# depth 6), LightGBM (500 rounds, 63 leaves), a 100-tree fully grown
# scikit-learn forest and a BIG_TREES-tree forest (fully grown, or of at most
# BIG_LEAVES leaves per tree) meant not to fit the cache; saves each in its
# library's format and as ONNX; writes each library's predictions; and times
# XGBoost's inplace_predict, LightGBM's predict, scikit-learn's predict_proba
# and ONNX Runtime at 1 and 2 threads in batches of 1, 100 and 10,000 rows.
# bench/libs (Go) then imports each model as `sawmill import` does, checks
# the interpreter against the library's predictions (bench/libs/main.go,
# tolerance), emits C (auto's layout and table) and Go (auto's layout), holds
# every output to the interpreter bit for bit, times NAME_predict_batch /
# NAME_predict_batch_threads and PredictBatch / PredictBatchWorkers the same
# way, and prints the table: ns per row per side, the fastest library over
# the fastest sawmill side, sawmill's ns per tree per row, and this
# machine's branch floor.
#
# The two sides are timed one model at a time, the library's run and then
# sawmill's, so each ratio compares figures taken seconds apart (the load of
# a shared machine drifts over minutes); ROUNDS=N goes over the models N
# times, the later rounds reusing the trained models (libs.py --load), and
# prints a table per model and round.
#
# Usage: bench/libs/run.sh [REPS]        (default 5; best of REPS per figure)
#   ROWS=20000 MODELS=xgb,lgbm,rf,rfbig BATCHES=1,100,10000 THREADS=1,2
#   C_LAYOUTS=auto,table,block,perfect (the default; LAYOUT+avx2 is built with
#   -mavx2 too, LAYOUT+avx512 with -march=x86-64-v4, to see what a user's target
#   flags do to the same C; a +avx2 or +avx512 asked for on a CPU without it is
#   dropped with a note)
#   BIG_TREES=1000 BIG_LEAVES=0 SINGLE_ROWS=1000 CALLGRIND=0 (rows per count)
#   LATENCY_ROWS=2000 (one row per call through sawmill's C and the XGBoost and
#   LightGBM C APIs, p50 and p99; the wheels' shared libraries)
#   ROUNDS=1; KEEP=DIR keeps the models, rows and predictions in DIR;
#   REUSE=1 with KEEP=DIR of an earlier run reuses its trained models from the
#   first round (libs.py --load; the table is generated again, the same)
set -euo pipefail
cd "$(dirname "$0")/../.."
reps=${1:-5}
py=${PYTHON:-.venv/bin/python}
tmp=${KEEP:-$(mktemp -d)}
mkdir -p "$tmp"
[ -n "${KEEP:-}" ] || trap 'rm -rf "$tmp"' EXIT

go build -o "$tmp/train-bench" ./bench/train
go build -o "$tmp/libs-bench" ./bench/libs
xgblib=$("$py" -c 'import os, xgboost; print(os.path.join(os.path.dirname(xgboost.__file__), "lib", "libxgboost.so"))')
lgblib=$("$py" -c 'import os, lightgbm; print(os.path.join(os.path.dirname(lightgbm.__file__), "lib", "lib_lightgbm.so"))')
"$tmp/train-bench" -gen "$tmp/data.csv" -rows "${ROWS:-20000}" -seed 1
models=${MODELS:-xgb,lgbm,rf,rfbig}
# An -mavx2 build cannot run on a CPU without AVX2 (this one may lack it).
layouts=
for l in $(echo "${C_LAYOUTS:-auto,table,block,perfect}" | tr , ' '); do
	case $l in
	*+avx2) grep -qw avx2 /proc/cpuinfo 2>/dev/null || { echo "note: $l left out, the CPU has no AVX2" >&2; continue; } ;;
	*+avx512) grep -qw avx512f /proc/cpuinfo 2>/dev/null || { echo "note: $l left out, the CPU has no AVX-512F" >&2; continue; } ;;
	esac
	layouts=$layouts${layouts:+,}$l
done
for round in $(seq "${ROUNDS:-1}"); do
	for m in ${models//,/ }; do
		load=
		[ "$round" -eq 1 ] && [ -z "${REUSE:-}" ] || load=--load
		echo "== $m, round $round, load average $(cut -d' ' -f1-3 /proc/loadavg)"
		"$py" bench/libs/libs.py "$tmp/data.csv" "$tmp" --reps "$reps" --only "$m" $load \
			--batches "${BATCHES:-1,100,10000}" --threads "${THREADS:-1,2}" --single-rows "${SINGLE_ROWS:-1000}" \
			--rf-big-trees "${BIG_TREES:-1000}" --rf-big-leaves "${BIG_LEAVES:-0}" >"$tmp/libs-$m.txt"
		"$tmp/libs-bench" -dir "$tmp" -libs "$tmp/libs-$m.txt" -models "$m" -reps "$reps" \
			-batches "${BATCHES:-1,100,10000}" -threads "${THREADS:-1,2}" -single-rows "${SINGLE_ROWS:-1000}" \
			-c "$layouts" -callgrind "${CALLGRIND:-0}" -latency-rows "${LATENCY_ROWS:-2000}" \
			-xgboost-lib "$xgblib" -lightgbm-lib "$lgblib"
	done
done
