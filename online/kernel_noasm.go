//go:build !amd64 || purego

package online

// useAVX is false: this build has only the portable kernels.
const useAVX = false

func stdDot(theta, x, mu, inv []float64) float64 { return stdDotGo(theta, x, mu, inv) }
func stdSq(x, mu, inv []float64) float64         { return stdSqGo(x, mu, inv) }
func axpy(a float64, x, y []float64)             { axpyGo(a, x, y) }
func welford(mu, m2, sxy, x []float64, f, w, wy float64) {
	welfordGo(mu, m2, sxy, x, f, w, wy)
}
func saga(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64) {
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
}

func stdRow(dst, x, mu, inv []float64)                        { stdRowGo(dst, x, mu, inv) }
func dot(a, b []float64) float64                              { return dotGo(a, b) }
func axpy2(a float64, x []float64, b float64, y, s []float64) { axpy2Go(a, x, b, y, s) }

func impute(dst, x, mean []float64, limit float64) bool { return imputeGo(dst, x, mean, limit) }

func welford2(mu, m2, sxy, xo, xn []float64, fo, wo, wyo, fn, wn, wyn float64) {
	welford2Go(mu, m2, sxy, xo, xn, fo, wo, wyo, fn, wn, wyn)
}

func stdPrep(xa, xt, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork float64) {
	return stdPrepGo(xa, xt, x, row, mu, inv, refMu, refInv)
}

func stdPrep1(theta, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork, da, dt float64) {
	return stdPrep1Go(theta, x, row, mu, inv, refMu, refInv)
}

func sagaDotRaw(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64 {
	return sagaDotRawGo(theta, s, x, mu, inv, xn, e, h, c, t, r, delta)
}

func sagaArrive0(theta, s, x, mu, inv, xa, xo, dst []float64, e, h, c, t, r, delta, a, b float64) {
	sagaArrive0Go(theta, s, x, mu, inv, xa, xo, dst, e, h, c, t, r, delta, a, b)
}

func sagaArriveRaw(theta, s, x, mu, inv, xa, xo, xn, dst []float64, e, h, c, t, r, delta, a, b float64) float64 {
	return sagaArriveRawGo(theta, s, x, mu, inv, xa, xo, xn, dst, e, h, c, t, r, delta, a, b)
}

func sagaAll(theta, s, x, mu, inv, xa, xo, xn []float64, prm []stepParam, c float64) {
	sagaAllGo(theta, s, x, mu, inv, xa, xo, xn, prm, c)
}

func dot2All(theta, x, y, out []float64) { dot2AllGo(theta, x, y, out) }

func sumRows(s, x, g []float64, d, k int) { sumRowsGo(s, x, g, d, k) }

// Arithmetic names the floating-point path the learners run on in this
// process: always "portable" (pure Go) in this build. The same records
// give bit-identical models only on the same path.
func Arithmetic() string { return "portable" }
