#!/usr/bin/env bash
# The binned C layout beside the table layout. Part 1: out-of-bag error of
# `sawmill train --max-bins N` (N = 16, 64, 255, and unbinned) on the Breast
# Cancer Wisconsin (Diagnostic) data (W. H. Wolberg, W. N. Street, O. L.
# Mangasarian, UCI ML Repository, 1995, as shipped with scikit-learn; the
# copy in golden/testdata/sklearn-breast-cancer), TREES trees, seeds 1-5,
# with each forest's C table bytes per node (inspect --c-sizes). Part 2:
# speed of binned against table, double and float C, on a 100-tree depth-8
# forest trained with --max-bins 255 on the invented table of
# bench/train/synth (ROWS rows x 20 features, seeded; it stands for no real
# measurement), timed by bench/c side by side.
#
# Usage: bench/c/binned.sh [TREES] [ROWS]      (defaults 100 20000)
set -euo pipefail
cd "$(dirname "$0")/../.."
trees=${1:-100}
rows=${2:-20000}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go build -o "$tmp/sawmill" ./cmd/sawmill
go build -o "$tmp/train-bench" ./bench/train
go build -o "$tmp/c-bench" ./bench/c
data=golden/testdata/sklearn-breast-cancer/data.csv
echo "breast cancer, $trees trees: max-bins, seed, oob error, C bytes/node (double table, double binned, float table, float binned)"
for bins in 0 16 64 255; do
	for seed in 1 2 3 4 5; do
		"$tmp/sawmill" train "$data" --label label --task classification --trees "$trees" --seed "$seed" \
			--max-bins "$bins" --importance=false -o "$tmp/bc.json" >/dev/null
		oob=$("$tmp/sawmill" inspect "$tmp/bc.json" | awk '$1 == "oob_error" { print $2 }')
		bpn=$("$tmp/sawmill" inspect "$tmp/bc.json" --c-sizes | awk '($2 == "table" || $2 == "binned") && NF >= 4 { printf "%s ", $4 }')
		echo "max-bins $bins seed $seed oob $oob bytes/node $bpn"
	done
done
"$tmp/train-bench" -gen "$tmp/data.csv" -rows "$rows" -seed 1
"$tmp/sawmill" train "$tmp/data.csv" --label label --task classification --trees 100 --max-depth 8 --seed 1 \
	--max-bins 255 --importance=false -o "$tmp/model.json" >/dev/null
"$tmp/c-bench" -model "$tmp/model.json" -rows "$tmp/data.csv" -no-go -c table,binned,table-float,binned-float
