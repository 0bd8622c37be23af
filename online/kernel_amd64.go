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
	if j == n {
		return ok
	}
	return imputeGo(dst[j:], x[j:], mean[j:], limit) && ok
}

//go:noescape
func welford2AVX(mu, m2, sxy, xo, xn []float64, fo, wo, wyo, fn, wn, wyn float64)

//go:noescape
func stdPrepAVX(xa, xt, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork float64)

func welford2(mu, m2, sxy, xo, xn []float64, fo, wo, wyo, fn, wn, wyn float64) {
	n := len(mu)
	if useAVX && len(m2) >= n && len(sxy) >= n && len(xo) >= n && len(xn) >= n {
		welford2AVX(mu, m2, sxy, xo, xn, fo, wo, wyo, fn, wn, wyn)
		return
	}
	welford2Go(mu, m2, sxy, xo, xn, fo, wo, wyo, fn, wn, wyn)
}

func stdPrep(xa, xt, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork float64) {
	n := len(xa)
	if useAVX && len(xt) >= n && len(x) >= n && len(row) >= n && len(mu) >= n && len(inv) >= n && len(refMu) >= n && len(refInv) >= n {
		return stdPrepAVX(xa, xt, x, row, mu, inv, refMu, refInv)
	}
	return stdPrepGo(xa, xt, x, row, mu, inv, refMu, refInv)
}

//go:noescape
func stdPrep1AVX(theta, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork, da, dt float64)

func stdPrep1(theta, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork, da, dt float64) {
	n := len(theta)
	if useAVX && len(x) >= n && len(row) >= n && len(mu) >= n && len(inv) >= n && len(refMu) >= n && len(refInv) >= n {
		return stdPrep1AVX(theta, x, row, mu, inv, refMu, refInv)
	}
	return stdPrep1Go(theta, x, row, mu, inv, refMu, refInv)
}

//go:noescape
func sumRowsAVX(s, x, g []float64, d, k, rows int)

// sumRows adds Σ_r g[r·k+m]·x_r to row m of s for every member m < k
// (sumRowsGo): the same FMAs, in the same order, as axpy row by row.
func sumRows(s, x, g []float64, d, k int) {
	if k < 1 || d < 1 {
		return
	}
	rows := len(g) / k
	if useAVX && len(s) >= k*d && len(x) >= rows*d {
		sumRowsAVX(s, x, g, d, k, rows)
		return
	}
	sumRowsGo(s, x, g, d, k)
}

// Arithmetic names the floating-point path the learners run on in this
// process: "avx2" (the assembly kernels) or "portable" (pure Go). The same
// records give bit-identical models only on the same path.
func Arithmetic() string {
	if useAVX {
		return "avx2"
	}
	return "portable"
}
