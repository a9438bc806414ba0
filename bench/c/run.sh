#!/usr/bin/env bash
# Times emitted C against emitted Go, the interpreter and scikit-learn's batch
# predict_proba on the same forest and rows. scikit-learn (from
# /usr/bin/python3) trains a RandomForestClassifier of TREES trees, fully
# grown, on the invented table of bench/train/synth (ROWS rows x 20 features,
# two classes, seeded; it stands for no real measurement), writes it as a
# sawmill forest file and times predict_proba over every row with n_jobs=2;
# bench/c then emits, builds (gcc -O2) and times the same forest over the
# same rows on one thread, checking every checksum against the interpreter.
#
# Usage: bench/c/run.sh [TREES] [ROWS] [ROUNDS]      (defaults 100 20000 3)
#   C_SIDES=table,table-batch,table-float,table-2threads,nested   C layouts to time
#   GO_SIDES=nested,table,branchless                  emitted Go layouts
# (nested C of a 400k-node forest takes gcc -O2 minutes to build.)
set -euo pipefail
cd "$(dirname "$0")/../.."
trees=${1:-100}
rows=${2:-20000}
rounds=${3:-3}
py=/usr/bin/python3
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

go build -o "$tmp/train-bench" ./bench/train
go build -o "$tmp/c-bench" ./bench/c
"$tmp/train-bench" -gen "$tmp/data.csv" -rows "$rows" -seed 1
"$py" bench/c/sklearn_predict.py "$tmp/data.csv" "$tmp/model.json" "$trees" 2 1 7 | tee "$tmp/sk"
secs=$(awk '$1 == "sklearn_predict_seconds" { print $2 }' "$tmp/sk")
"$tmp/c-bench" -model "$tmp/model.json" -rows "$tmp/data.csv" -rounds "$rounds" -sklearn "$secs" \
	-c "${C_SIDES:-table,table-batch,table-float,table-2threads,nested}" -go "${GO_SIDES:-nested,table,branchless}"
