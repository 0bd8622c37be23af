//go:build !arm64

package online

import "math"

// softThreshold returns sign(z)·max(|z| − t, 0) for t ≥ 0, the prox of
// t|·| (Parikh & Boyd 2014, §6.5.2), on the bits of the floats: |z| − t is
// rounded as z − t or z + t would be (negation is exact), a negative
// difference is masked to zero by its own sign bit, and z's sign is put
// back. It equals z − clamp(z, −t, t) in value (the zeros may differ in
// sign) with no branch: where θ is dense the sign of z changes at random
// from one coordinate to the next, and a branch on it is mispredicted
// about half the time. On amd64 this is cheaper than the built-in min and
// max, which need a fix-up for zeros around MINSD (BenchmarkAdd with
// -tags purego; kernel_soft_arm64.go has the arm64 form).
func softThreshold(z, t float64) float64 {
	zb := math.Float64bits(z)
	sign := zb & (1 << 63)
	u := math.Float64bits(math.Float64frombits(zb^sign) - t)
	u &^= uint64(int64(u) >> 63)
	return math.Float64frombits(u | sign)
}
