#!/usr/bin/env bash
# Class-count leaves against stored leaf values on the forest of m4.sh: a
# 100-tree, two-class, depth-8 forest grown by sawmill train on the invented
# table of bench/train/synth (ROWS rows x 20 features, seeded). Each of the
# table and binned layouts, double and float, is emitted three times (leaves
# as counts, with --leaf-values, and as counts with --pack, packed bits),
# built with gcc -O2 and run over the training rows; the outputs' bits must
# be the same. Prints one line per
# build: the checksum of the output bits, and "same" or "DIFFER".
#
# Usage: bench/c/counts.sh [ROWS] [TREES] [DEPTH]      (defaults 20000 100 8)
#   MAX_BINS=N   train with --max-bins N
set -euo pipefail
cd "$(dirname "$0")/../.."
rows=${1:-20000}
trees=${2:-100}
depth=${3:-8}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
. bench/c/grow.sh
grow_forest "$tmp" "$rows" "$trees" "$depth"
cat > "$tmp/driver.c" <<'C'
#include <stdio.h>
#include <string.h>
#include "model.h"
/* Reads the CSV (header, then the features first on each line) and prints
 * each output's bytes in hex. */
int main(void)
{
	char line[4096];
	FTYPE x[MODEL_NUM_FEATURES], out[MODEL_NUM_OUTPUTS];
	if (!fgets(line, sizeof line, stdin)) {
		return 1;
	}
	while (fgets(line, sizeof line, stdin)) {
		char *p = line;
		int f, j, n;
		size_t k;
		for (f = 0; f < MODEL_NUM_FEATURES; f++) {
			double v;
			if (sscanf(p, "%lf%n", &v, &n) != 1) {
				return 1;
			}
			p += n + 1;
			x[f] = (FTYPE)v;
		}
		model_predict(x, out);
		for (j = 0; j < MODEL_NUM_OUTPUTS; j++) {
			unsigned char b[sizeof(FTYPE)];
			memcpy(b, &out[j], sizeof b);
			for (k = 0; k < sizeof b; k++) {
				printf("%02x", b[k]);
			}
			putchar(' ');
		}
		putchar('\n');
	}
	return 0;
}
C
for layout in table binned; do
	for ft in double float; do
		sums=()
		for leaves in counts values packed; do
			d="$tmp/$layout-$ft-$leaves"
			flags=(--target c --layout "$layout")
			[ "$ft" = float ] && flags+=(--float)
			[ "$leaves" = values ] && flags+=(--leaf-values)
			[ "$leaves" = packed ] && flags+=(--pack)
			"$tmp/sawmill" compile "$tmp/model.json" "${flags[@]}" -o "$d" >/dev/null
			gcc -std=c99 -O2 -DFTYPE="$ft" -I"$d" -o "$d/score" "$tmp/driver.c" "$d/model.c" -lm
			sums+=("$("$d/score" < "$tmp/data.csv" | md5sum | cut -d' ' -f1)")
		done
		verdict=same
		[ "${sums[0]}" = "${sums[1]}" ] && [ "${sums[0]}" = "${sums[2]}" ] || verdict=DIFFER
		echo "$layout/$ft: counts ${sums[0]}, values ${sums[1]}, packed ${sums[2]}: $verdict"
	done
done
