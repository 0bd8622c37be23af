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

func sagaDot(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64 {
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
	return dotGo(theta, xn)
}

func dot2(a, x, y []float64) (float64, float64) { return dotGo(a, x), dotGo(a, y) }

func sagaArrive(theta, s, x, mu, inv, xa, xo, xn []float64, e, h, c, t, r, delta, a, b float64) float64 {
	return sagaArriveGo(theta, s, x, mu, inv, xa, xo, xn, e, h, c, t, r, delta, a, b)
}

func impute(dst, x, mean []float64, limit float64) bool { return imputeGo(dst, x, mean, limit) }
