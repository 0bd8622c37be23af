package online

// The per-step vector kernels of the learners. Each has a portable Go
// version (here) and, on amd64 CPUs with AVX2 and FMA, an assembly version
// (kernel_amd64.s, kernel_saga_amd64.s) selected once at start-up. The
// assembly exists because the windowed SAGA step fuses six loads, a soft
// threshold and two stores per coordinate, which scalar Go runs about 5×
// slower than the gonum SSE2 dot product and axpy it is benchmarked against
// (bench_test.go). The kernels are fused so that an arriving record costs
// few passes over its d features: one to validate it (impute), one to
// standardize it (stdPrep), one for the scaler (welford2), and the first
// step's, which also folds it into the members' sums (sagaArrive0 and
// kin); a ladder of K > 1 members takes each step in one call for all of
// them (sagaAll, dot2All), and a resync in one call per run of slots
// (sumRows). The two versions agree to rounding (kernel_test.go); a given
// machine always uses the same one, so results stay bit-identical run to
// run.

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
// The soft threshold is z − clamp(z, −t, t): for finite z and t ≥ 0 it is
// z − t, z + t or a zero, the value of max(z−t, 0) + min(z+t, 0), in three
// operations instead of five (TestSoftThreshold).
func sagaGo(theta, s, x, mu, inv []float64, e, h, c, t, r, delta float64) {
	n := len(theta)
	s, x, mu, inv = s[:n], x[:n], mu[:n], inv[:n]
	for j, th := range theta {
		q := (e*x[j] + s[j]) - h*mu[j]
		z := th - c*(q*inv[j])
		theta[j] = (z - clamp(z, -t, t)) * r
		s[j] += delta * x[j]
	}
}

// clamp returns z limited to [lo, hi], as the AVX kernels do with VMAXPD
// then VMINPD (they may differ in the sign of a zero; NaN cannot reach
// either from validated input).
func clamp(z, lo, hi float64) float64 {
	if z < lo {
		z = lo
	}
	if z > hi {
		z = hi
	}
	return z
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

// sagaDotRawGo runs sagaGo and returns the new θ against the raw record
// xn standardized, Σ θ_j (xn_j − μ_j) v_j.
func sagaDotRawGo(theta, s, x, mu, inv, xn []float64, e, h, c, t, r, delta float64) float64 {
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
	return stdDotGo(theta, xn, mu, inv)
}

// sagaArrive0Go folds a new record (a·xa) and an evicted one (b·xo) into s,
// runs sagaGo, and then copies xa to dst (which may be xo).
func sagaArrive0Go(theta, s, x, mu, inv, xa, xo, dst []float64, e, h, c, t, r, delta, a, b float64) {
	axpy2Go(a, xa, b, xo, s)
	sagaGo(theta, s, x, mu, inv, e, h, c, t, r, delta)
	copy(dst, xa)
}

// sagaArriveRawGo is sagaArrive0Go returning the new θ against the raw
// record xn standardized.
func sagaArriveRawGo(theta, s, x, mu, inv, xa, xo, xn, dst []float64, e, h, c, t, r, delta, a, b float64) float64 {
	sagaArrive0Go(theta, s, x, mu, inv, xa, xo, dst, e, h, c, t, r, delta, a, b)
	return stdDotGo(theta, xn, mu, inv)
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

// welford2Go removes xo (f, w, wy = fo, wo, wyo, all negative shares as in
// welfordGo) and then adds xn (fn, wn, wyn) in one pass; per element it is
// exactly welfordGo twice, so the result is the same to the bit.
func welford2Go(mu, m2, sxy, xo, xn []float64, fo, wo, wyo, fn, wn, wyn float64) {
	n := len(mu)
	m2, sxy, xo, xn = m2[:n], sxy[:n], xo[:n], xn[:n]
	for j, m := range mu {
		v := xo[j]
		d := v - m
		m += fo * d
		q := m2[j] + wo*(d*(v-m))
		p := sxy[j] + wyo*v
		v = xn[j]
		d = v - m
		m += fn * d
		mu[j] = m
		m2[j] = q + wn*(d*(v-m))
		sxy[j] = p + wyn*v
	}
}

// stdPrepGo standardizes x into xa and row into xt, (x_j − μ_j)·v_j, and
// returns Σ ((x_j − ρ_j) u_j)² and Σ xa_j²: in one pass, what an arriving
// record needs of its features (the squared norms on the reference scale ρ,
// u and on the working scale μ, v bound the step size).
func stdPrepGo(xa, xt, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork float64) {
	n := len(xa)
	xt, x, row, mu, inv, refMu, refInv = xt[:n], x[:n], row[:n], mu[:n], inv[:n], refMu[:n], refInv[:n]
	for j := range xa {
		u := (x[j] - mu[j]) * inv[j]
		xa[j] = u
		sqWork += u * u
		r := (x[j] - refMu[j]) * refInv[j]
		sqRef += r * r
		xt[j] = (row[j] - mu[j]) * inv[j]
	}
	return sqRef, sqWork
}

// stdPrep1Go is stdPrepGo for a ladder of one member: instead of writing x
// and row standardized it returns θ against both (the member's predictor on
// the arriving record and on the first step's record).
func stdPrep1Go(theta, x, row, mu, inv, refMu, refInv []float64) (sqRef, sqWork, da, dt float64) {
	n := len(theta)
	x, row, mu, inv, refMu, refInv = x[:n], row[:n], mu[:n], inv[:n], refMu[:n], refInv[:n]
	for j, th := range theta {
		u := (x[j] - mu[j]) * inv[j]
		sqWork += u * u
		da += th * u
		r := (x[j] - refMu[j]) * refInv[j]
		sqRef += r * r
		dt += th * ((row[j] - mu[j]) * inv[j])
	}
	return sqRef, sqWork, da, dt
}

// stepParam is one member's part of a batched proximal SAGA step (the
// sagaAll kernels): the scalars of sagaGo (c is shared by the members), the
// arrival weights a and b of sagaArrive0Go, and the returned dot product.
// Its layout (8 float64, 64 bytes) is read by kernel_saga_amd64.s.
type stepParam struct {
	e, h, t, r, delta, a, b float64
	dot                     float64
}

// sagaAllGo is sagaGo for every member k, θ_k = theta[k·d:], s_k = s[k·d:],
// with the scalars of prm[k] and c; d = len(x). With xa set it folds in the
// arrival first (as sagaArrive0Go, without the copy), and with xn set it returns θ_k against xn
// in prm[k].dot.
func sagaAllGo(theta, s, x, mu, inv, xa, xo, xn []float64, prm []stepParam, c float64) {
	d := len(x)
	for k := range prm {
		p := &prm[k]
		th, sk := theta[k*d:(k+1)*d], s[k*d:(k+1)*d]
		if xa != nil {
			axpy2Go(p.a, xa, p.b, xo, sk)
		}
		sagaGo(th, sk, x, mu, inv, p.e, p.h, c, p.t, p.r, p.delta)
		if xn != nil {
			p.dot = dotGo(th, xn)
		}
	}
}

// dot2AllGo writes θ_k·x and θ_k·y to out[2k] and out[2k+1] for every
// member k, θ_k = theta[k·d:(k+1)·d], d = len(x).
func dot2AllGo(theta, x, y, out []float64) {
	d := len(x)
	for k := range len(out) / 2 {
		out[2*k], out[2*k+1] = dotGo(theta[k*d:(k+1)*d], x), dotGo(theta[k*d:(k+1)*d], y)
	}
}

// sumRowsGo adds Σ_r g[r·k+m]·x[r·d:(r+1)·d] to s[m·d:(m+1)·d] for every
// member m < k, over the rows r < len(g)/k in order, skipping rows whose
// g is 0: member by member exactly what axpyGo row by row does, so a
// resync of the SAGA sums takes one call instead of n·K.
func sumRowsGo(s, x, g []float64, d, k int) {
	rows := len(g) / k
	for m := range k {
		sm := s[m*d : (m+1)*d]
		for r := range rows {
			if v := g[r*k+m]; v != 0 {
				axpyGo(v, x[r*d:(r+1)*d], sm)
			}
		}
	}
}
