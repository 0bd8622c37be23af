package online

// softThreshold returns z − clamp(z, −t, t), the soft threshold (the prox
// of t|·|, Parikh & Boyd 2014, §6.5.2) as the AVX kernels take it. On
// arm64 the built-in max and min are one FMAXD and one FMIND each, with
// Go's rules for zeros and NaN, so this is three instructions without a
// branch (kernel_soft.go has the form for other architectures).
func softThreshold(z, t float64) float64 {
	return z - min(max(z, -t), t)
}
