//go:build !arm64

package online

import "math"

// softThreshold returns z − clamp(z, −t, t), the soft threshold (the prox
// of t|·|, Parikh & Boyd 2014, §6.5.2) as the AVX kernels take it, for
// t ≥ 0. The clamp is taken on the bits: for floats of one sign the order
// of their bit patterns as integers is the order of their values, so
// min(|z|, t) is an integer min (a CMOV, no branch) and z's sign is put
// back; the one rounding is the subtraction, z − t or z + t outside
// [−t, t] and z − z = 0 inside, as in the AVX kernels. No branch matters:
// where θ is dense the sign of z changes at random from one coordinate to
// the next, and a branch on it is mispredicted about half the time; the
// built-in float min and max need a fix-up for zeros around MINSD on amd64
// (kernel_soft_arm64.go has the arm64 form).
func softThreshold(z, t float64) float64 {
	zb := math.Float64bits(z)
	sign := zb & (1 << 63)
	c := min(zb^sign, math.Float64bits(t)&^(1<<63)) | sign
	return z - math.Float64frombits(c)
}
