#!/usr/bin/env bash
# Times sawmill's random-forest training against scikit-learn's on the same
# invented table (bench/train/synth: 20,000 rows x 20 features, two classes,
# seeded; it stands for no real measurement), back to back, several rounds:
# 100 trees, fully grown, sqrt(p) features per node, bootstrap, 2 threads /
# n_jobs=2. Prints each side's median fit time, their ratio, sawmill's peak
# RSS for the whole `sawmill train` command, and then the interpreter
# benchmark (ns per row, 500 trees on the same table).
#
# Usage: bench/train/run.sh [ROUNDS]     (scikit-learn from /usr/bin/python3)
set -euo pipefail
cd "$(dirname "$0")/../.."
rounds=${1:-3}
py=/usr/bin/python3
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

go build -o "$tmp/train-bench" ./bench/train
go build -o "$tmp/sawmill" ./cmd/sawmill
"$tmp/train-bench" -gen "$tmp/data.csv" -rows 20000 -seed 1

field() { awk -v k="$1" '$1 == k { print $2 }'; }
median() { sort -g | awk '{ a[NR] = $1 } END { print a[int((NR + 1) / 2)] }'; }

: >"$tmp/ours"
: >"$tmp/theirs"
: >"$tmp/ours_imp"
for r in $(seq "$rounds"); do
	"$tmp/train-bench" -fit "$tmp/data.csv" -trees 100 -threads 2 -seed "$r" >"$tmp/out"
	field fit_seconds <"$tmp/out" >>"$tmp/ours"
	nodes=$(field nodes <"$tmp/out")
	"$py" bench/train/sklearn_fit.py "$tmp/data.csv" 100 2 "$r" >"$tmp/out"
	field sklearn_fit_seconds <"$tmp/out" >>"$tmp/theirs"
	sknodes=$(field sklearn_nodes <"$tmp/out")
	skver=$(field sklearn_version <"$tmp/out")
	"$tmp/train-bench" -fit "$tmp/data.csv" -trees 100 -threads 2 -seed "$r" -importance >"$tmp/out"
	field fit_seconds <"$tmp/out" >>"$tmp/ours_imp"
	echo "round $r: sawmill $(tail -1 "$tmp/ours") s ($nodes nodes), with importance $(tail -1 "$tmp/ours_imp") s;" \
		"scikit-learn $skver $(tail -1 "$tmp/theirs") s ($sknodes nodes)"
done
ours=$(median <"$tmp/ours")
ours_imp=$(median <"$tmp/ours_imp")
theirs=$(median <"$tmp/theirs")
echo "median fit, 100 trees, 20000 x 20, 2 threads:"
echo "  sawmill (OOB error, no importance)  $ours s"
echo "  sawmill (OOB error and importance)  $ours_imp s"
echo "  scikit-learn (no OOB)               $theirs s"
awk -v a="$ours" -v b="$theirs" -v c="$ours_imp" 'BEGIN { printf "  ratio sawmill / scikit-learn: %.2f (with importance %.2f)\n", a / b, c / b }'

/usr/bin/time -f "%M %e" -o "$tmp/time" "$tmp/sawmill" train "$tmp/data.csv" --label label --task classification \
	--trees 100 --threads 2 -o "$tmp/model.json" >/dev/null
read -r rss wall <"$tmp/time"
awk -v k="$rss" -v w="$wall" 'BEGIN { printf "sawmill train (CLI, read CSV, train, importance, write): %.1f s wall, peak RSS %.0f MB\n", w, k / 1024 }'

go test -run '^$' -bench Interpreter -benchtime 20000x ./bench/train
