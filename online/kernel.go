package online

// The per-step vector kernels of the learners. Each has a portable Go
// version (here) and, on amd64 CPUs with AVX2 and FMA, an assembly version
// (kernel_amd64.s) selected once at start-up. The assembly exists because
// the windowed SAGA step fuses six loads, a soft threshold and two stores per
// coordinate, which scalar Go runs about 5× slower than the gonum SSE2 dot
// product and axpy it is benchmarked against (bench_test.go). The two
// versions agree to rounding (kernel_test.go); a given machine always uses
// the same one, so results stay bit-identical run to run.

// stdDotGo returns Σ θ_j (x_j − μ_j) v_j: θ against x standardized with mean
// μ and inverse standard deviation v.
func stdDotGo(theta, x, mu, inv []float64) float64 {
	n := len(theta)
	x, mu, inv = x[:n], mu[:n], inv[:n]
	var s float64
	for j, t := range theta {
		s += t * ((x[j] - mu[j]) * inv[j])
	}
	return s
}

// stdSqGo returns Σ ((x_j − μ_j) v_j)², the squared norm of x standardized.
func stdSqGo(x, mu, inv []float64) float64 {
	n := len(x)
	mu, inv = mu[:n], inv[:n]
	var s float64
	for j, v := range x {
		u := (v - mu[j]) * inv[j]
		s += u * u
	}
	return s
}

// axpyGo adds a·x to y.
func axpyGo(a float64, x, y []float64) {
	y = y[:len(x)]
	for j, v := range x {
		y[j] += a * v
	}
}

// welfordGo adds (w > 0) or removes (w < 0) x with weight |w| from the
// running means μ and sums of squared deviations m2 (Welford 1962; removal
// as in Chan, Golub & LeVeque 1983), with f = w / (W + w) the weight share
// of x in the new total W + w, and adds wy·x to sxy.
func welfordGo(mu, m2, sxy, x []float64, f, w, wy float64) {
	n := len(mu)
	m2, sxy, x = m2[:n], sxy[:n], x[:n]
	for j, m := range mu {
		d := x[j] - m
		m += f * d
		mu[j] = m
		m2[j] += w * (d * (x[j] - m))
		sxy[j] += wy * x[j]
	}
}

// sagaGo is the coordinate part of one proximal SAGA step (saga.go):
// q = e·x + s − h·μ, z = θ − c·v·q, θ = prox(z) = soft(z, t)·r, then s += δ·x.
func sagaGo(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64) {
	n := len(theta)
	s, x, mu, inv = s[:n], x[:n], mu[:n], inv[:n]
	for j, th := range theta {
		q := (e*x[j] + s[j]) - h*mu[j]
		z := th - c*(q*inv[j])
		theta[j] = (max(z-t, 0) + min(z+t, 0)) * r
		s[j] += delta * x[j]
	}
}

// stdRowGo writes x standardized, (x_j − μ_j)·v_j, to dst.
func stdRowGo(dst, x, mu, inv []float64) {
	n := len(dst)
	x, mu, inv = x[:n], mu[:n], inv[:n]
	for j := range dst {
		dst[j] = (x[j] - mu[j]) * inv[j]
	}
}

// dotGo returns Σ a_j b_j.
func dotGo(a, b []float64) float64 {
	b = b[:len(a)]
	var s float64
	for j, v := range a {
		s += v * b[j]
	}
	return s
}

// axpy2Go adds a·x + b·y to s.
func axpy2Go(a float64, x []float64, b float64, y, s []float64) {
	n := len(x)
	y, s = y[:n], s[:n]
	for j, v := range x {
		s[j] += a*v + b*y[j]
	}
}

// sagaArriveGo folds a new record (a·xa) and an evicted one (b·xo) into s,
// then runs sagaGo and returns the dot product of the new θ with xn.
func sagaArriveGo(theta, s, x, mu, inv, xa, xo, xn []float64, e, h, c, t, r, delta, a, b float64) float64 {
	axpy2Go(a, xa, b, xo, s)
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
	return dotGo(theta, xn)
}

// imputeGo copies x to dst with NaN replaced by mean and reports whether
// every other |x_j| is at most limit (an infinity is not).
func imputeGo(dst, x, mean []float64, limit float64) bool {
	n := len(dst)
	x, mean = x[:n], mean[:n]
	ok := true
	for j, v := range x {
		if v != v {
			dst[j] = mean[j]
			continue
		}
		ok = ok && v <= limit && v >= -limit
		dst[j] = v
	}
	return ok
}
