#!/usr/bin/env bash
# Sizes of a 100-tree, two-class, depth-8 random forest grown by sawmill on
# the invented table of bench/train/synth (ROWS rows x 20 features, seeded;
# it stands for no real measurement): each layout's static tables in double
# and float C, and the object compiled by arm-none-eabi-gcc -std=c99 -Os
# -mcpu=cortex-m4 -mthumb (.text + .rodata), against 256 KiB of flash.
#
# Usage: bench/c/m4.sh [ROWS] [TREES] [DEPTH]      (defaults 20000 100 8)
#   MAX_BINS=N   train with --max-bins N (splits at N-1 quantile edges per feature)
#   INT_LEAVES=N also the sizes with leaves as scaled intN (compile --int-leaves N, lossy)
set -euo pipefail
cd "$(dirname "$0")/../.."
rows=${1:-20000}
trees=${2:-100}
depth=${3:-8}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go build -o "$tmp/c-bench" ./bench/c
. bench/c/grow.sh
grow_forest "$tmp" "$rows" "$trees" "$depth"
"$tmp/c-bench" -model "$tmp/model.json" -sizes ${INT_LEAVES:+-int-leaves "$INT_LEAVES"}
