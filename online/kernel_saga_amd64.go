//go:build !purego

package online

// The proximal SAGA step kernels of kernel_amd64.s and their
// dispatchers (see kernel.go for the portable versions). The dispatchers
// check lengths once: the assembly trusts them.

//go:noescape
func sagaAVX(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64)

//go:noescape
func sagaDotRawAVX(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64

//go:noescape
func sagaArrive0AVX(theta, s, x, mu, inv, xa, xo, dst []float64, e, h, c, t, r, delta, a, b float64)

//go:noescape
func sagaArriveRawAVX(theta, s, x, mu, inv, xa, xo, xn, dst []float64, e, h, c, t, r, delta, a, b float64) float64

//go:noescape
func sagaAllAVX(theta, s, x, mu, inv []float64, prm []stepParam, c float64)

//go:noescape
func sagaAllDotAVX(theta, s, x, mu, inv, xn []float64, prm []stepParam, c float64)

//go:noescape
func sagaAllArrive0AVX(theta, s, x, mu, inv, xa, xo []float64, prm []stepParam, c float64)

//go:noescape
func sagaAllArriveAVX(theta, s, x, mu, inv, xa, xo, xn []float64, prm []stepParam, c float64)

//go:noescape
func dot2AllAVX(theta, x, y, out []float64)

func saga(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64) {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n {
		sagaAVX(theta, s, x, mu, inv, e, h, c, t, r, delta)
		return
	}
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
}

func sagaDotRaw(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64 {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n && len(xn) >= n {
		return sagaDotRawAVX(theta, s, x, mu, inv, xn, e, h, c, t, r, delta)
	}
	return sagaDotRawGo(theta, s, x, mu, inv, xn, e, h, c, t, r, delta)
}

func sagaArrive0(theta, s, x, mu, inv, xa, xo, dst []float64, e, h, c, t, r, delta, a, b float64) {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n && len(xa) >= n && len(xo) >= n && len(dst) >= n {
		sagaArrive0AVX(theta, s, x, mu, inv, xa, xo, dst, e, h, c, t, r, delta, a, b)
		return
	}
	sagaArrive0Go(theta, s, x, mu, inv, xa, xo, dst, e, h, c, t, r, delta, a, b)
}

func sagaArriveRaw(theta, s, x, mu, inv, xa, xo, xn, dst []float64, e, h, c, t, r, delta, a, b float64) float64 {
	n := len(theta)
	if useAVX && len(s) >= n && len(x) >= n && len(mu) >= n && len(inv) >= n && len(xa) >= n && len(xo) >= n && len(xn) >= n && len(dst) >= n {
		return sagaArriveRawAVX(theta, s, x, mu, inv, xa, xo, xn, dst, e, h, c, t, r, delta, a, b)
	}
	return sagaArriveRawGo(theta, s, x, mu, inv, xa, xo, xn, dst, e, h, c, t, r, delta, a, b)
}

// sagaAll steps every member (sagaAllGo); xa and xo are both nil or both
// set, and xn may be nil.
func sagaAll(theta, s, x, mu, inv, xa, xo, xn []float64, prm []stepParam, c float64) {
	d, kd := len(x), len(prm)*len(x)
	ok := useAVX && len(theta) >= kd && len(s) >= kd && len(mu) >= d && len(inv) >= d &&
		(xa == nil || len(xa) >= d && len(xo) >= d) && (xn == nil || len(xn) >= d)
	switch {
	case !ok:
		sagaAllGo(theta, s, x, mu, inv, xa, xo, xn, prm, c)
	case xa != nil && xn != nil:
		sagaAllArriveAVX(theta, s, x, mu, inv, xa, xo, xn, prm, c)
	case xa != nil:
		sagaAllArrive0AVX(theta, s, x, mu, inv, xa, xo, prm, c)
	case xn != nil:
		sagaAllDotAVX(theta, s, x, mu, inv, xn, prm, c)
	default:
		sagaAllAVX(theta, s, x, mu, inv, prm, c)
	}
}

// dot2All writes θ_k·x and θ_k·y to out[2k] and out[2k+1] (dot2AllGo).
func dot2All(theta, x, y, out []float64) {
	if useAVX && len(y) >= len(x) && len(theta) >= len(out)/2*len(x) {
		dot2AllAVX(theta, x, y, out)
		return
	}
	dot2AllGo(theta, x, y, out)
}
