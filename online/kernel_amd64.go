//go:build !purego

package online

// useAVX reports whether the AVX2+FMA kernels of kernel_amd64.s run here.
var useAVX = detectAVX()

// detectAVX checks CPUID for AVX, FMA and AVX2 and XGETBV for the OS saving
// the YMM registers.
func detectAVX() bool {
	maxLeaf, _, _, _ := cpuid(0, 0)
	if maxLeaf < 7 {
		return false
	}
	_, _, c1, _ := cpuid(1, 0)
	const fma, osxsave, avx = 1 << 12, 1 << 27, 1 << 28
	if c1&(fma|osxsave|avx) != fma|osxsave|avx {
		return false
	}
	if xcr0, _ := xgetbv(); xcr0&6 != 6 {
		return false
	}
	_, b7, _, _ := cpuid(7, 0)
	return b7&(1<<5) != 0
}

func cpuid(eaxArg, ecxArg uint32) (eax, ebx, ecx, edx uint32)
func xgetbv() (eax, edx uint32)

//go:noescape
func stdDotAVX(theta, x, mu, inv []float64) float64

//go:noescape
func stdSqAVX(x, mu, inv []float64) float64

//go:noescape
func axpyAVX(a float64, x, y []float64)

//go:noescape
func welfordAVX(mu, m2, sxy, x []float64, f, w, wy float64)

//go:noescape
func sagaAVX(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64)

// The dispatchers check lengths once: the assembly trusts them.

func stdDot(theta, x, mu, inv []float64) float64 {
	if useAVX && len(x) >= len(theta) && len(mu) >= len(theta) && len(inv) >= len(theta) {
		return stdDotAVX(theta, x, mu, inv)
	}
	return stdDotGo(theta, x, mu, inv)
}

func stdSq(x, mu, inv []float64) float64 {
	if useAVX && len(mu) >= len(x) && len(inv) >= len(x) {
		return stdSqAVX(x, mu, inv)
	}
	return stdSqGo(x, mu, inv)
}

func axpy(a float64, x, y []float64) {
	if useAVX && len(y) >= len(x) {
		axpyAVX(a, x, y)
		return
	}
	axpyGo(a, x, y)
}

func welford(mu, m2, sxy, x []float64, f, w, wy float64) {
	n := len(mu)
	if useAVX && len(m2) >= n && len(sxy) >= n && len(x) >= n {
		welfordAVX(mu, m2, sxy, x, f, w, wy)
		return
	}
	welfordGo(mu, m2, sxy, x, f, w, wy)
}

func saga(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64) {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n {
		sagaAVX(theta, s, x, mu, inv, e, h, c, t, r, delta)
		return
	}
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
}

//go:noescape
func stdRowAVX(dst, x, mu, inv []float64)

//go:noescape
func dotAVX(a, b []float64) float64

//go:noescape
func axpy2AVX(a float64, x []float64, b float64, y, s []float64)

func stdRow(dst, x, mu, inv []float64) {
	n := len(dst)
	if useAVX && len(x) >= n && len(mu) >= n && len(inv) >= n {
		stdRowAVX(dst, x, mu, inv)
		return
	}
	stdRowGo(dst, x, mu, inv)
}

func dot(a, b []float64) float64 {
	if useAVX && len(b) >= len(a) {
		return dotAVX(a, b)
	}
	return dotGo(a, b)
}

func axpy2(a float64, x []float64, b float64, y, s []float64) {
	n := len(x)
	if useAVX && len(y) >= n && len(s) >= n {
		axpy2AVX(a, x, b, y, s)
		return
	}
	axpy2Go(a, x, b, y, s)
}

//go:noescape
func sagaDotAVX(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64

func sagaDot(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64 {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n && len(xn) >= n {
		return sagaDotAVX(theta, s, x, mu, inv, xn, e, h, c, t, r, delta)
	}
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
	return dotGo(theta, xn)
}

//go:noescape
func dot2AVX(a, x, y []float64) (ax, ay float64)

//go:noescape
func sagaArriveAVX(theta, s, x, mu, inv, xa, xo, xn []float64, e, h, c, t, r, delta, a, b float64) float64

func dot2(a, x, y []float64) (float64, float64) {
	if useAVX && len(x) >= len(a) && len(y) >= len(a) {
		return dot2AVX(a, x, y)
	}
	return dotGo(a, x), dotGo(a, y)
}

func sagaArrive(theta, s, x, mu, inv, xa, xo, xn []float64, e, h, c, t, r, delta, a, b float64) float64 {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n && len(xa) >= n && len(xo) >= n && len(xn) >= n {
		return sagaArriveAVX(theta, s, x, mu, inv, xa, xo, xn, e, h, c, t, r, delta, a, b)
	}
	return sagaArriveGo(theta, s, x, mu, inv, xa, xo, xn, e, h, c, t, r, delta, a, b)
}

//go:noescape
func imputeAVX(dst, x, mean []float64, limit float64) (ok bool)

// impute copies x to dst with NaN replaced by mean and reports whether
// every other |x_j| is at most limit.
func impute(dst, x, mean []float64, limit float64) bool {
	n := len(dst)
	x, mean = x[:n], mean[:n]
	ok, j := true, 0
	if useAVX {
		ok, j = imputeAVX(dst, x, mean, limit), n&^3
	}
	return imputeGo(dst[j:], x[j:], mean[j:], limit) && ok
}
