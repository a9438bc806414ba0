//go:build cgo

// Package libm calls the C library's float32 exponential, so that tests can
// hold forest.Expf against it. Only tests import it.
package libm

// #cgo CFLAGS: -O2
// #cgo LDFLAGS: -lm
// #include <math.h>
// #include <stdint.h>
// #include <string.h>
// static void expf_range(uint32_t start, uint32_t stride, float *out, int n) {
//   for (int i = 0; i < n; i++) {
//     uint32_t b = start + (uint32_t)i * stride;
//     float x;
//     memcpy(&x, &b, 4);
//     out[i] = expf(x);
//   }
// }
import "C"

import "unsafe"

// Available is true when the C library is linked in (cgo builds).
const Available = true

// ExpfBits fills out[i] with the C library's expf of the float32 whose bits
// are start + i·stride (wrapping at 2^32).
func ExpfBits(start, stride uint32, out []float32) {
	if len(out) == 0 {
		return
	}
	C.expf_range(C.uint32_t(start), C.uint32_t(stride), (*C.float)(unsafe.Pointer(&out[0])), C.int(len(out)))
}
