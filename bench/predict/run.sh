#!/usr/bin/env bash
# Times sawmill predict on 2M and 20M rows of five features with a model of
# 100 trees: wall time, rows per second and peak RSS (GNU time's %M), and
# the ratio of peak RSS between the two sizes (1.0 when memory is flat).
#
#   bash bench/predict/run.sh            # 2M and 20M rows
#   bash bench/predict/run.sh 200000     # other sizes
#
# The model: 100 trees grown on 2,500 invented labelled rows, some 15,000
# nodes, depth up to 19 (the demo's has 10,342 nodes).
#
# On 2026-12-03, 2 vCPUs under a load average of 13 to 16 from other work
# (so sawmill got about 0.17 of a core; CPU seconds are the figure to read):
#   2,000,000 rows ( 67 MB):  135.7 s wall, 14,742 rows/s, peak RSS 46.2 MB
#  20,000,000 rows (663 MB): 1208.2 s wall, 16,553 rows/s, peak RSS 43.1 MB
#  peak RSS, largest against smallest: 0.93
set -euo pipefail
cd "$(dirname "$0")/../.."
sizes=("$@")
[ ${#sizes[@]} -gt 0 ] || sizes=(2000000 20000000)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go build -o "$tmp/sawmill" ./cmd/sawmill
go build -o "$tmp/gen" ./bench/predict
"$tmp/gen" -rows 2500 -label -o "$tmp/train.csv"
"$tmp/sawmill" train "$tmp/train.csv" --label state --trees 100 --seed 1 -o "$tmp/model.json" | sed -n 2p
echo "cores: $(nproc)"
first_rss=
for n in "${sizes[@]}"; do
	"$tmp/gen" -rows "$n" -seed 2 -o "$tmp/rows.csv"
	mb=$(du -m "$tmp/rows.csv" | cut -f1)
	/usr/bin/time -f "%M %e %U %S" -o "$tmp/time" "$tmp/sawmill" predict "$tmp/model.json" "$tmp/rows.csv" -o "$tmp/out.csv"
	read -r rss wall user sys <"$tmp/time"
	lines=$(wc -l <"$tmp/out.csv")
	[ "$lines" -eq $((n + 1)) ] || { echo "predict wrote $lines lines for $n rows" >&2; exit 1; }
	awk -v n="$n" -v mb="$mb" -v k="$rss" -v w="$wall" -v u="$user" -v s="$sys" 'BEGIN {
		printf "%9d rows (%5d MB CSV): %6.1f s wall, %9.0f rows/s, peak RSS %5.1f MB, CPU %.2f cores\n",
			n, mb, w, n / w, k / 1024, (u + s) / w }'
	[ -n "$first_rss" ] || first_rss=$rss
	last_rss=$rss
	rm -f "$tmp/rows.csv" "$tmp/out.csv"
done
awk -v a="$first_rss" -v b="$last_rss" 'BEGIN { printf "peak RSS, largest against smallest: %.2f\n", b / a }'
