package forest

import "math"

// Expf is e^x in float32, bit for bit the C library's expf as glibc 2.36
// computes it on x86-64 with FMA (its __expf_fma variant, chosen at run time
// on CPUs with FMA and AVX2). The algorithm is glibc's (from Arm's
// optimized-routines, sysdeps/ieee754/flt-32/e_expf.c): x·32/ln 2 = k + r
// with r in [−1/2, 1/2], 2^(k/32) from a 32-entry table, 2^(r/32) from a
// degree-3 polynomial evaluated in double, the product rounded to float. The
// constants below are the bytes of glibc 2.36's __exp2f_data, and every fused
// multiply-add is where the disassembly of __expf_fma has one (math.FMA, so
// the result is the same on any machine and no other operation is fused).
// TestExpfMatchesLibm holds it against the machine's expf.
//
// Out of range it behaves as glibc does: +Inf above 0x1.62e42ep6, +0 below
// −0x1.9fe368p6, the least subnormal (2^−149) between that and −0x1.9d1d9ep6
// (glibc's "may underflow" value), 0 for −Inf and x+x for NaN and +Inf.
func Expf(x float32) float32 {
	bits := math.Float32bits(x)
	abstop := bits >> 20 & 0x7ff
	if abstop >= 0x42b { // |x| >= 88 or x is NaN
		switch {
		case bits == 0xff800000: // −Inf
			return 0
		case abstop >= 0x7f8: // +Inf or NaN
			return x + x
		case x > 0x1.62e42ep6: // above log(0x1p128)
			return float32(math.Inf(1))
		case x < -0x1.9fe368p6: // below log(0x1p-150)
			return 0
		case x < -0x1.9d1d9ep6: // below log(0x1p-149)
			return 0x1p-149
		}
	}
	xd := float64(x)
	kd := math.FMA(expfInvLn2N, xd, expfShift)
	ki := math.Float64bits(kd)
	kd -= expfShift
	r := math.FMA(expfInvLn2N, xd, -kd)
	s := math.Float64frombits(expfTab[ki%32] + ki<<47)
	z := math.FMA(expfC0, r, expfC1)
	r2 := float64(r * r)
	y := math.FMA(r, expfC2, 1)
	y = math.FMA(z, r2, y)
	return float32(y * s)
}

// glibc 2.36 __exp2f_data: tab[i] = bits of 2^(i/32) with i<<47 subtracted,
// invln2_scaled = 32/ln 2, poly_scaled = the polynomial's coefficients for
// r scaled by 1/32, shift = 0x1.8p52 (rounds to an integer in its last bits).
var (
	expfInvLn2N = math.Float64frombits(0x40471547652b82fe)
	expfC0      = math.Float64frombits(0x3ebc6af84b912394)
	expfC1      = math.Float64frombits(0x3f2ebfce50fac4f3)
	expfC2      = math.Float64frombits(0x3f962e42ff0c52d6)
	expfShift   = math.Float64frombits(0x4338000000000000)
)

var expfTab = [32]uint64{
	0x3ff0000000000000, 0x3fefd9b0d3158574, 0x3fefb5586cf9890f, 0x3fef9301d0125b51,
	0x3fef72b83c7d517b, 0x3fef54873168b9aa, 0x3fef387a6e756238, 0x3fef1e9df51fdee1,
	0x3fef06fe0a31b715, 0x3feef1a7373aa9cb, 0x3feedea64c123422, 0x3feece086061892d,
	0x3feebfdad5362a27, 0x3feeb42b569d4f82, 0x3feeab07dd485429, 0x3feea47eb03a5585,
	0x3feea09e667f3bcd, 0x3fee9f75e8ec5f74, 0x3feea11473eb0187, 0x3feea589994cce13,
	0x3feeace5422aa0db, 0x3feeb737b0cdc5e5, 0x3feec49182a3f090, 0x3feed503b23e255d,
	0x3feee89f995ad3ad, 0x3feeff76f2fb5e47, 0x3fef199bdd85529c, 0x3fef3720dcef9069,
	0x3fef5818dcfba487, 0x3fef7c97337b9b5f, 0x3fefa4afa2a490da, 0x3fefd0765b6e4540,
}

// ExpfData returns the constants Expf computes with, for emitters that write
// Expf out in another language: the 32-entry table, 32/ln 2, the three
// polynomial coefficients (C0 the cubic's, C2 the linear one's) and the
// rounding shift, each as its float64 bits.
func ExpfData() (tab [32]uint64, invLn2N, c0, c1, c2, shift uint64) {
	return expfTab, math.Float64bits(expfInvLn2N), math.Float64bits(expfC0), math.Float64bits(expfC1),
		math.Float64bits(expfC2), math.Float64bits(expfShift)
}
