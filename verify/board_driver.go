package verify

import (
	"fmt"
	"strings"
)

// boardRowsFile is the rows file of a board run, in the folder QEMU runs
// in: boardRows's format for a bare-metal image, cRows's for Linux.
const boardRowsFile = "rows.in"

// boardDriver is the bare-metal main: over semihosting (picolibc's
// semihost.h, the Arm semihosting interface that QEMU implements for Arm
// and RISC-V) it reads boardRows's file a chunk of rows at a time, narrows
// each value to the API's type, and writes to out.txt per row every
// output's float64 bit pattern in hex and the class (-1 for a regressor);
// each chunk is scored again with NAME_predict_batch, which must give the
// same bits. It exits through SYS_EXIT_EXTENDED with 0, or 2 for bad
// input, 3 when the batch differs, 5 when NAME_selftest (NAME_selftest.c,
// built from the first rows) finds a row that differs, 4 when NAME_fp_check finds the
// floating-point unit (or its emulation) flushing subnormals or not
// rounding to nearest.
func boardDriver(name, ft string, classifier bool, features, outputs int) string {
	return boardDriverWith(name, ft, classifier, features, outputs, false)
}

// boardDriverWith is boardDriver, or with count the driver of
// CountInstructions: it calls sawmill_mark twice at start-up and before
// and after each NAME_predict, and leaves out the batch and the self-test.
func boardDriverWith(name, ft string, classifier bool, features, outputs int, count bool) string {
	chunk := boardChunk(features, outputs)
	up := strings.ToUpper(name)
	class := "-1"
	if classifier {
		class = name + "_predict_class(xs + k * NF)"
	}
	mark, base, batch, selftest := "", "", boardBatch, boardSelftest
	if count {
		mark, base, batch, selftest = "sawmill_mark();\n\t\t", "sawmill_mark();\n\tsawmill_mark();\n\t", "", ""
	}
	r := strings.NewReplacer("MARK_BASE", base, "MARK", mark, "BATCH", batch, "SELFTEST", selftest)
	src := r.Replace(boardDriverSource)
	if count {
		src = strings.Replace(src, "int main(void)", countMarker+"\nint main(void)", 1)
	}
	r = strings.NewReplacer("NAME", name, "UPNF", up+"_NUM_FEATURES", "UPNO", up+"_NUM_OUTPUTS", "FT", ft, "CLASS", class,
		"CHUNKROWS", fmt.Sprint(chunk))
	return r.Replace(src)
}

// boardBatch scores a chunk again with NAME_predict_batch.
const boardBatch = `	NAME_predict_batch(xs, n, yb);
	if (memcmp(ys, yb, sizeof(FT) * n * NO) != 0) {
		stop("NAME_predict_batch differs from NAME_predict", 3);
	}
`

// boardSelftest runs NAME_selftest.
const boardSelftest = `	if (NAME_selftest() != 0) {
		stop("NAME_selftest() is not 0", 5);
	}
`

// countMarker is the counting driver's marker, a function QEMU's log
// names.
const countMarker = `void sawmill_mark(void);
__attribute__((noinline)) void sawmill_mark(void)
{
	__asm__ volatile("" ::: "memory");
}
`

// boardChunk is how many rows the bare-metal driver holds at once: four,
// or fewer where their inputs and two copies of their outputs (as doubles)
// would take more than 4 KiB of a micro:bit's 16 KiB of RAM.
func boardChunk(features, outputs int) int {
	return max(1, min(4, 4096/(8*(features+2*outputs))))
}

const boardDriverSource = `#include <stdint.h>
#include <string.h>
#include <semihost.h>

#include "NAME.h"

int NAME_selftest(void);

#define NF UPNF
#define NO UPNO
#define CHUNK CHUNKROWS

static uint64_t raw[CHUNK * NF];
static FT xs[CHUNK * NF];
static FT ys[CHUNK * NO];
static FT yb[CHUNK * NO];
static char line[16 * 17 + 16];

static void stop(const char *why, int code)
{
	sys_semihost_write0(why);
	sys_semihost_write0("\n");
	sys_semihost_exit_extended((uintptr_t)code);
}

static char *hex64(char *p, uint64_t v)
{
	int s;
	for (s = 60; s >= 0; s -= 4) {
		*p++ = "0123456789abcdef"[(v >> s) & 15u];
	}
	return p;
}

static char *decimal(char *p, int v)
{
	char d[12];
	int n = 0;
	if (v < 0) {
		*p++ = '-';
		v = -v;
	}
	do {
		d[n++] = (char)('0' + v % 10);
		v /= 10;
	} while (v > 0);
	while (n > 0) {
		*p++ = d[--n];
	}
	return p;
}

static void flush(int out, const char *from, const char *to)
{
	if (sys_semihost_write(out, from, (uintptr_t)(to - from)) != 0) {
		stop("cannot write out.txt", 2);
	}
}

static void score_chunk(int out, uint32_t n)
{
	uint32_t i, k;
	int j;
	for (i = 0; i < n * NF; i++) {
		double d;
		memcpy(&d, &raw[i], sizeof d);
		xs[i] = (FT)d;
	}
	for (k = 0; k < n; k++) {
		char *p = line;
		MARKNAME_predict(xs + k * NF, ys + k * NO);
		MARK/* scored */
		for (j = 0; j < NO; j++) {
			double v = (double)ys[k * NO + (uint32_t)j];
			uint64_t bits;
			memcpy(&bits, &v, sizeof bits);
			p = hex64(p, bits);
			*p++ = ' ';
			if (p - line >= 16 * 17) {
				flush(out, line, p);
				p = line;
			}
		}
		p = decimal(p, CLASS);
		*p++ = '\n';
		flush(out, line, p);
	}
BATCH}

int main(void)
{
	uint32_t head[2], r, n;
	int in = sys_semihost_open("rows.in", SH_OPEN_R_B);
	int out = sys_semihost_open("out.txt", SH_OPEN_W);
	MARK_BASEif (NAME_fp_check() != 0) {
		stop("NAME_fp_check() is not 0: the floating-point unit breaks exactness", 4);
	}
	if (in < 0 || out < 0) {
		stop("cannot open rows.in or out.txt", 2);
	}
	if (sys_semihost_read(in, head, sizeof head) != 0 || head[1] != NF) {
		stop("rows.in: bad header", 2);
	}
	for (r = 0; r < head[0]; r += n) {
		n = head[0] - r < CHUNK ? head[0] - r : CHUNK;
		if (sys_semihost_read(in, raw, sizeof(uint64_t) * n * NF) != 0) {
			stop("rows.in: short", 2);
		}
		score_chunk(out, n);
	}
	sys_semihost_close(in);
	sys_semihost_close(out);
SELFTEST	sys_semihost_exit_extended(0);
}
`
