# Sourced by m4.sh and counts.sh, which measure the same forest.
#
# grow_forest TMP ROWS TREES DEPTH builds sawmill and bench/train into TMP,
# writes the invented table of bench/train/synth (ROWS rows x 20 features,
# seed 1; it stands for no real measurement) to TMP/data.csv and grows a
# TREES-tree, two-class, DEPTH-deep forest on it into TMP/model.json.
# MAX_BINS=N trains with --max-bins N.
grow_forest() {
	local tmp=$1 rows=$2 trees=$3 depth=$4
	go build -o "$tmp/train-bench" ./bench/train
	go build -o "$tmp/sawmill" ./cmd/sawmill
	"$tmp/train-bench" -gen "$tmp/data.csv" -rows "$rows" -seed 1
	"$tmp/sawmill" train "$tmp/data.csv" --label label --task classification --trees "$trees" --max-depth "$depth" --seed 1 \
		${MAX_BINS:+--max-bins "$MAX_BINS"} -o "$tmp/model.json" >/dev/null
}
