//go:build !cgo

package libm

// Available is false: this build has no cgo, so no C library to call.
const Available = false

// ExpfBits panics: without cgo there is no C library to call.
func ExpfBits(start, stride uint32, out []float32) {
	panic("BUG: libm.ExpfBits called in a build without cgo")
}
