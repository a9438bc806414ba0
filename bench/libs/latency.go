package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
)

// latencyLibs names, per model, the library whose C API the single-row
// latency is set beside, and the -D that selects its code in latencyC.
var latencyLibs = map[string]struct{ lib, define string }{
	"xgb":  {"xgboost", "LIB_XGBOOST"},
	"lgbm": {"lightgbm", "LIB_LIGHTGBM"},
}

// latency times one row at a time, each call alone, over the first m rows
// (after one warm-up pass), through sawmill's C (NAME_predict of the side
// built in sideDir) and through the library's own C API in the shared
// library libPath, on one thread; it returns "p50 p99" lines for both.
func latency(m, modelPath, rowsPath, sideDir, libPath string, n int) ([]string, error) {
	l, ok := latencyLibs[m]
	if !ok || libPath == "" {
		return nil, nil
	}
	src := filepath.Join(sideDir, "latency.c")
	if err := os.WriteFile(src, []byte(latencyC), 0o644); err != nil {
		return nil, err
	}
	var lines []string
	for _, build := range []struct{ name, define string }{{"sawmill C model_predict", "SAWMILL"}, {l.lib + " C API", l.define}} {
		bin := filepath.Join(sideDir, "latency-"+build.define)
		args := []string{"-std=gnu99", "-O2", "-D" + build.define, "-o", bin, "latency.c"}
		if build.define == "SAWMILL" {
			args = append(args, "model.c")
		} else {
			args = append(args, libPath, "-Wl,-rpath,"+filepath.Dir(libPath))
		}
		cmd := exec.Command("gcc", append(args, "-lm")...)
		cmd.Dir = sideDir
		if out, err := cmd.CombinedOutput(); err != nil {
			return nil, fmt.Errorf("gcc latency.c: %v\n%s", err, out)
		}
		out, err := exec.Command(bin, modelPath, rowsPath, strconv.Itoa(n)).Output()
		if err != nil {
			return nil, fmt.Errorf("%s: %v: %s", build.name, err, stderrOf(err))
		}
		var p50, p99 float64
		if _, err := fmt.Sscanf(strings.TrimSpace(string(out)), "%g %g", &p50, &p99); err != nil {
			return nil, fmt.Errorf("%s: %q: %v", build.name, out, err)
		}
		lines = append(lines, fmt.Sprintf("one row per call, %d rows, 1 thread: %-26s p50 %8.0f ns  p99 %8.0f ns", n, build.name, p50, p99))
	}
	return lines, nil
}

// latencyC times single-row calls: "latency MODEL ROWS.bin N" prints the
// p50 and p99 in ns of N calls, each on one row, each timed alone, after a
// warm-up pass. The libraries' C API functions are declared here from their
// documented signatures (XGBoost's c_api.h, LightGBM's c_api.h, as
// remembered; the wheels ship no headers): XGBoosterPredictFromDense takes
// the row as an array-interface JSON string (XGBoost's inplace predict),
// LGBM_BoosterPredictForMatSingleRow a row-major float64 row.
const latencyC = `#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define NF 20

#if defined(SAWMILL)
#include "model.h"
#elif defined(LIB_XGBOOST)
typedef void *BoosterHandle;
typedef uint64_t bst_ulong;
int XGBoosterCreate(void *const dmats[], bst_ulong len, BoosterHandle *out);
int XGBoosterLoadModel(BoosterHandle handle, const char *fname);
int XGBoosterSetParam(BoosterHandle handle, const char *name, const char *value);
int XGBoosterPredictFromDense(BoosterHandle handle, const char *values, const char *config, void *m,
                              const bst_ulong **out_shape, bst_ulong *out_dim, const float **out_result);
const char *XGBGetLastError(void);
#elif defined(LIB_LIGHTGBM)
typedef void *BoosterHandle;
int LGBM_BoosterCreateFromModelfile(const char *filename, int *out_num_iterations, BoosterHandle *out);
int LGBM_BoosterPredictForMatSingleRow(BoosterHandle handle, const void *data, int data_type, int ncol, int is_row_major,
                                       int predict_type, int start_iteration, int num_iteration, const char *parameter,
                                       int64_t *out_len, double *out_result);
const char *LGBM_GetLastError(void);
#endif

static double now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec * 1e9 + (double)ts.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
	long n = atol(argv[3]), r;
	int pass;
	double *x = malloc(sizeof(double) * (size_t)n * NF), *t = malloc(sizeof(double) * (size_t)n), sum = 0;
	FILE *in = fopen(argv[2], "rb");
	if (in == NULL || fread(x, sizeof(double), (size_t)n * NF, in) != (size_t)n * NF) {
		fprintf(stderr, "cannot read rows\n");
		return 2;
	}
#if defined(SAWMILL)
	double out[MODEL_NUM_OUTPUTS];
	(void)argv[1];
#elif defined(LIB_XGBOOST)
	BoosterHandle h;
	float xf[NF];
	char arr[256];
	const bst_ulong *shape;
	bst_ulong dim;
	const float *res;
	const char *cfg = "{\"type\": 0, \"training\": false, \"iteration_begin\": 0, \"iteration_end\": 0, \"strict_shape\": false, \"missing\": NaN}";
	snprintf(arr, sizeof arr, "{\"data\": [%lu, true], \"shape\": [1, %d], \"typestr\": \"<f4\", \"version\": 3}", (unsigned long)(uintptr_t)xf, NF);
	if (XGBoosterCreate(NULL, 0, &h) != 0 || XGBoosterLoadModel(h, argv[1]) != 0 || XGBoosterSetParam(h, "nthread", "1") != 0) {
		fprintf(stderr, "xgboost: %s\n", XGBGetLastError());
		return 2;
	}
#elif defined(LIB_LIGHTGBM)
	BoosterHandle h;
	int iters;
	int64_t len;
	double res[2];
	if (LGBM_BoosterCreateFromModelfile(argv[1], &iters, &h) != 0) {
		fprintf(stderr, "lightgbm: %s\n", LGBM_GetLastError());
		return 2;
	}
#endif
	for (pass = 0; pass < 2; pass++) {
		for (r = 0; r < n; r++) {
			const double *row = x + r * NF;
			double t0 = now(), v;
#if defined(SAWMILL)
			model_predict(row, out);
			v = out[MODEL_NUM_OUTPUTS - 1];
#elif defined(LIB_XGBOOST)
			int j;
			for (j = 0; j < NF; j++) {
				xf[j] = (float)row[j];
			}
			if (XGBoosterPredictFromDense(h, arr, cfg, NULL, &shape, &dim, &res) != 0) {
				fprintf(stderr, "xgboost: %s\n", XGBGetLastError());
				return 2;
			}
			v = res[0];
#elif defined(LIB_LIGHTGBM)
			if (LGBM_BoosterPredictForMatSingleRow(h, row, 1, NF, 1, 0, 0, -1, "num_threads=1", &len, res) != 0) {
				fprintf(stderr, "lightgbm: %s\n", LGBM_GetLastError());
				return 2;
			}
			v = res[len - 1];
#endif
			t[r] = now() - t0;
			sum += v;
		}
	}
	qsort(t, (size_t)n, sizeof(double), cmp);
	printf("%.0f %.0f\n", t[n / 2], t[(n * 99) / 100]);
	return sum != sum ? 1 : 0;
}
`
