package online

import (
	"math"
)

// solveEvery returns R, the number of arrivals between two refreshes of
// the scale on the record path (Add), for a window of capacity n: n/100,
// between 16 and 100 (100 at the default window of 10,000). A refresh
// marks every member stale; a member is solved on the record path only
// when the caller readies it (Ladder.Ready: the system G, c built from the
// sums in O(d²), then coordinate descent warm from its last solution), so
// a record pays for the member it reads, not for all K. Measured at
// d = 128, window 10,000 (BenchmarkExactPath, stream-ns/rec: Ready and Eta
// of one member, then Add; three runs, 2026-12-02): 2.95–3.08 µs per
// record, of which about 2.3 µs is the rank-one update; when every member
// was solved every R records it was 5.2 µs (one run of the tree before,
// same session; 10.3, 6.5 and 5.1 µs at R = 32, 64 and 100 in an earlier
// measurement). A member read is at most R records old, which only the
// test-then-train loss of the drift watch sees: every read that leaves
// the process (Optimum, OptimumPath, KKT) solves for itself from the
// current sums, a read of a stale member solves a copy, and Idle solves
// whenever anything is stale. At R = 100 on a window of 10,000 the member
// read is 0.077 % from the current optimum on average, against
// 0.12–0.27 % for the SAGA members (BenchmarkExactPath, dist-stream).
func solveEvery(n int) int { return max(16, min(100, n/100)) }

// gramMember is one λ of a gram ladder: the exact minimizer of F on the
// window as it was at the last solve, on the scale of that solve.
type gramMember struct {
	lambda float64
	b      float64   // intercept: the window's weighted mean label
	theta  []float64 // standardized coefficients (a row of covLearner.theta)
	kkt    float64   // KKT violation at the last solve (from G and c)
	stale  bool      // not solved since the last refresh of the scale or a change of λ (covLearner.ensure)
	c      *covLearner
	i      int // the member's index in c.ms
}

var _ member = (*gramMember)(nil)

// params returns the member, or for a stale member its solve on the
// current window into scratch (covLearner.read), which is not kept: every
// read sees a member solved on the working scale, and no read changes
// what the ladder computes later.
func (m *gramMember) params() (float64, []float64) {
	if m.stale {
		return m.c.read(m.i)
	}
	return m.b, m.theta
}

// covLearner is the "gram" learner, for the squared loss only. It keeps the
// train window's records (the trainset shared with the SAGA learner, so
// that Shrink, Grow, ResetFeature and the saved state work the same way)
// and the window's weighted sums around a shift (cx, cy), the window means
// at the last rebuild, which keeps the sums far from the cancellation a raw
// Σ w x xᵀ suffers when the means are large against the spread:
//
//	S = Σ w (x−cx)(x−cx)ᵀ (upper triangle), sx = Σ w (x−cx),
//	sxy = Σ w (x−cx)(y−cy), W = Σ w, sy = Σ w (y−cy).
//
// A record adds one symmetric rank-one term and its evicted predecessor
// removes one (one axpy2 per row of the triangle, O(d²), independent of
// the window length). The sums are rebuilt exactly from the records every
// resyncEvery window lengths of arrivals (rebuildDue), early when a mean
// drifts far from the shift (shiftFar), and at Shrink, so rounding never
// accumulates (amortized O(d²) per record). From them, in O(d²), the
// standardized Gram matrix G = X̃ᵀWX̃/W and cross-products
// c = X̃ᵀW(y − ȳ)/W of the window on its exact scale, from which every
// member is solved by coordinate descent with covariance updates, warm
// started from its previous solution (Friedman, Hastie & Tibshirani 2010,
// §2.2 and §2.5), to the KKT target gramTarget.
type covLearner struct {
	ts    *trainset
	ms    []*gramMember
	theta []float64 // K×d, member k's θ is row k
	alpha float64
	span  int64

	cx      []float64 // shift of the features
	cy      float64   // shift of the label
	sw, sy  float64
	sx, sxy []float64
	sxx     []float64 // d×d row-major, upper triangle (j ≤ k) kept
	built   int       // arrivals since the sums were rebuilt
	builtAt int       // window length at that rebuild

	every      int  // R, solveEvery of the capacity
	stale      bool // the window or the grid changed since the last refresh of the scale for a solve
	due        bool // the scale was refreshed for a solve that run makes
	lazy       bool // the due solve is the record path's: run marks the members stale instead
	solved     bool // the members have been solved at least once
	sinceSolve int  // arrivals since the last solve

	sys  bool    // solver holds the system of the current sums on the working scale (ensure)
	ybar float64 // the weighted mean label of that system

	solver gramSolver
	xc, xo []float64 // scratch: shifted arriving and evicted rows
	mu     []float64 // scratch: the exact scale for reads
	sd     []float64
	inv    []float64
	thetaR []float64 // scratch: a member's θ for reads
	thetaP []float64 // scratch: a stale member's θ as read (read)
}

var _ learner = (*covLearner)(nil)

// gramTarget is the KKT violation the gram learner's solves iterate to:
// DefaultKKT/1000, the margin below the published tolerance that keeps
// exact zeros (ExactOptions.Target).
const gramTarget = DefaultKKT / 1000

func newCov(o *Options, d int) *covLearner {
	mk := func(k int) []float64 { return make([]float64, k) }
	c := &covLearner{
		ts: newTrainset(d, o.Window), alpha: o.Penalty.Mix, span: o.Span.Milliseconds(), every: solveEvery(o.Window),
		theta: mk(o.Size * d), cx: mk(d), sx: mk(d), sxy: mk(d), sxx: mk(d * d),
		solver: newGramSolver(d), xc: mk(d), xo: mk(d), mu: mk(d), sd: mk(d), inv: mk(d), thetaR: mk(d), thetaP: mk(d),
	}
	for k := range o.Size {
		c.ms = append(c.ms, &gramMember{theta: c.theta[k*d : (k+1)*d : (k+1)*d], c: c, i: k})
	}
	return c
}

func (c *covLearner) members() []member {
	ms := make([]member, len(c.ms))
	for i, m := range c.ms {
		ms[i] = m
	}
	return ms
}

// fill returns the window means, which replace missing values.
func (c *covLearner) fill() []float64 { return c.ts.sc.mean }

func (c *covLearner) len() int        { return c.ts.ring.Len() }
func (c *covLearner) weight() float64 { return c.ts.sc.w }

// scale returns the scale of the last solve, on which the members are.
func (c *covLearner) scale() (mu, sd, inv []float64) { return c.ts.mu, c.ts.sd, c.ts.inv }

// setLambdas gives member i the λ lambdas[i].
func (c *covLearner) setLambdas(lambdas []float64) {
	for i, m := range c.ms {
		if m.lambda != lambdas[i] {
			m.lambda = lambdas[i]
			m.stale, c.stale = true, true
		}
	}
}

// shift re-seats the members after the grid moved by k steps: member i
// becomes a copy of its nearest old neighbour (a warm start), λ and
// staleness included, so that setLambdas, which follows, leaves a member
// whose λ did not change as it was and marks the others stale.
func (c *covLearner) shift(k int) {
	K := len(c.ms)
	cp := func(i, j int) {
		if i != j {
			mi, mj := c.ms[i], c.ms[j]
			mi.lambda, mi.b, mi.kkt, mi.stale = mj.lambda, mj.b, mj.kkt, mj.stale
			copy(c.ms[i].theta, c.ms[j].theta)
		}
	}
	if k > 0 {
		for i := 0; i < K; i++ {
			cp(i, min(i+k, K-1))
		}
	} else {
		for i := K - 1; i >= 0; i-- {
			cp(i, max(i+k, 0))
		}
	}
	c.stale = true
}

// add admits a validated record: span eviction, then the record replaces
// the oldest one of a full window (its rank-one term removed and the new
// one added in one pass) or is appended. It reports whether the scale was
// refreshed for a solve (every R arrivals, solveEvery, and after a
// rebuild); run then marks the members stale, and each is solved when the
// caller readies it (Ladder.Ready, ensure) or reads it (a copy, read).
func (c *covLearner) add(x []float64, y, w float64, t int64) bool {
	ts := c.ts
	lost := false
	if c.span > 0 && t != 0 {
		for m, ok := ts.ring.Oldest(); ok && m.t != 0 && m.t < t-c.span; m, ok = ts.ring.Oldest() {
			lost = c.evict() || lost
		}
	}
	if ts.ring.Len() == ts.ring.Cap() {
		m, _ := ts.ring.Oldest()
		s := ts.ring.Slot(0)
		old := ts.row(s)
		c.swapSums(old, m.w, m.y, x, w, y)
		lost = c.cancelled(m.w, c.xo) || lost
		ts.replace(x, y, w, t, 0, 0)
		copy(old, x)
	} else {
		c.swapSums(nil, 0, 0, x, w, y)
		s := ts.push(x, y, w, t, 0, 0)
		copy(ts.row(s), x)
	}
	c.stale = true
	c.built++
	c.sinceSolve++
	if c.rebuildDue() || lost {
		c.rebuild()
		c.lazy = true
		return c.prepare()
	}
	if c.sinceSolve >= c.every {
		if c.shiftFar() {
			c.rebuild()
		}
		c.lazy = true
		return c.prepare()
	}
	return false
}

// shiftFar reports whether a feature's window mean has moved more than 10
// of its standard deviations from its shift: the sums then carry terms
// (x − c)² a hundred times the variance, each update's rounding is that
// much larger against the covariance S/W − m mᵀ formed from them, and a
// stream whose means drift that far within the rebuild period rebuilds
// early (measured: 1.5e-12 relative error in G after 3,700 updates at 13
// standard deviations, TestGramDriftingMeans). A stationary stream never
// gets there. O(d), checked before each solve.
func (c *covLearner) shiftFar() bool {
	if !(c.sw > 0) {
		return false
	}
	rw := 1 / c.sw
	d := c.ts.d
	for j := range d {
		m := c.sx[j] * rw
		if v := c.sxx[j*d+j]*rw - m*m; m*m > 100*v && m != 0 {
			return true
		}
	}
	return false
}

// rebuildDue reports whether the scheduled exact rebuild of the sums is
// due: after resyncEvery window lengths of arrivals once the window held 64
// records or more at the last rebuild (one window length below that, so
// the shift settles while the window fills), the SAGA learner's resync
// schedule. A rebuild costs O(n·d²/2), so about d²/8 per record, an eighth
// of the rank-one swap.
func (c *covLearner) rebuildDue() bool {
	k := 1
	if c.builtAt >= 64 {
		k = resyncEvery
	}
	return c.built >= k*max(1, c.builtAt)
}

// swapSums removes the record (xo, wo, yo) from the sums (none when xo is
// nil) and adds (x, w, y): per row j of the triangle one axpy2 of length
// d − j.
func (c *covLearner) swapSums(xo []float64, wo, yo float64, x []float64, w, y float64) {
	d := c.ts.d
	for j := range d {
		c.xc[j] = x[j] - c.cx[j]
	}
	ey := y - c.cy
	c.sys = false
	if xo == nil {
		for j := range d {
			axpy(w*c.xc[j], c.xc[j:], c.sxx[j*d+j:(j+1)*d])
		}
		axpy(w, c.xc, c.sx)
		axpy(w*ey, c.xc, c.sxy)
		c.sw += w
		c.sy += w * ey
		return
	}
	for j := range d {
		c.xo[j] = xo[j] - c.cx[j]
	}
	eo := yo - c.cy
	for j := range d {
		axpy2(w*c.xc[j], c.xc[j:], -wo*c.xo[j], c.xo[j:], c.sxx[j*d+j:(j+1)*d])
	}
	axpy2(w, c.xc, -wo, c.xo, c.sx)
	axpy2(w*ey, c.xc, -wo*eo, c.xo, c.sxy)
	c.sw += w - wo
	c.sy += w*ey - wo*eo
}

// cancelLimit bounds the ratio of a removed record's term w(x_j − cx_j)²
// to what remains of the diagonal sum S_jj, and of its weight w to what
// remains of W: past it the removal cancelled
// more than six of the sums' sixteen digits (a record far out of the
// window's spread, valid up to maxValue, has left), and the sums are
// rebuilt from the records at once rather than at the next scheduled
// rebuild, up to resyncEvery window lengths later. A record of the
// window's own spread is about n times below the rest of the sum.
const cancelLimit = 1e6

// cancelled reports whether removing the record of weight wo whose
// shifted row is xo (swapSums, evict) cancelled the sums past
// cancelLimit.
func (c *covLearner) cancelled(wo float64, xo []float64) bool {
	if !(wo <= cancelLimit*c.sw) {
		return true // the weight sum W itself (a record of every feature at its shift)
	}
	d := c.ts.d
	for j, v := range xo {
		if v != 0 && wo*v*v > cancelLimit*c.sxx[j*d+j] {
			return true
		}
	}
	return false
}

// evict removes the oldest record from the sums and the window; it
// reports whether the removal cancelled the sums past cancelLimit. The
// removal is the addition of the record with weight −w (bit for bit the
// subtraction: negation is exact).
func (c *covLearner) evict() bool {
	ts := c.ts
	if ts.ring.Len() == 1 {
		ts.pop()
		c.clearSums()
		c.stale = true
		return false
	}
	m, _ := ts.ring.Oldest()
	c.swapSums(nil, 0, 0, ts.row(ts.ring.Slot(0)), -m.w, m.y)
	ts.pop()
	c.stale = true
	return c.cancelled(m.w, c.xc)
}

// clearSums empties the sums.
func (c *covLearner) clearSums() {
	c.sys = false
	clear(c.sxx)
	clear(c.sx)
	clear(c.sxy)
	c.sw, c.sy = 0, 0
}

// rebuild recomputes the scaler from the records (trainset.recompute),
// moves the shift to the window's means and recomputes the sums from the
// records in window order: O(n·d²), on the schedule of rebuildDue.
func (c *covLearner) rebuild() {
	ts := c.ts
	c.built, c.builtAt = 0, ts.ring.Len()
	c.clearSums()
	if ts.ring.Len() == 0 {
		clear(c.cx)
		c.cy = 0
		return
	}
	ts.recompute()
	copy(c.cx, ts.sc.mean)
	c.cy = ts.sc.wy / ts.sc.w
	for i, s := range ts.order() {
		m := ts.ring.At(i)
		c.swapSums(nil, 0, 0, ts.row(s), m.w, m.y)
	}
}

// prepare refreshes the scale for the solve that run makes and zeroes the
// coefficients of constant features (as the SAGA learner's refresh: the
// solver never moves a coefficient whose column of G is 0); it reports
// true so that the ladder re-anchors its grid on the refreshed λ_max.
func (c *covLearner) prepare() bool {
	c.ts.refresh()
	for j, v := range c.ts.inv {
		if v == 0 {
			for _, m := range c.ms {
				m.theta[j] = 0
			}
		}
	}
	c.due, c.sys = true, false
	return true
}

// run makes the solve that is due (after add, rescale or shrink); steps
// are ignored: the gram learner takes no stochastic steps. The record
// path's solve (add) only marks every member stale: a member is solved
// when the caller asks for it (Ladder.Ready, ensure), so a record pays
// for the members the caller reads on the record path (the pipeline
// reads one, its current model, per record) and not for all K. The other
// solves (Idle, Shrink) solve every member.
func (c *covLearner) run(int) {
	if !c.due {
		return
	}
	if c.lazy {
		c.due, c.lazy, c.stale, c.sinceSolve = false, false, false, 0
		for _, m := range c.ms {
			m.stale = true
		}
		return
	}
	c.solve()
}

// rescale prepares a solve of every member if anything changed since the
// last refresh, or if a member is stale (Idle).
func (c *covLearner) rescale() bool {
	if c.ts.ring.Len() == 0 {
		return false
	}
	c.lazy = false
	if c.stale {
		return c.prepare()
	}
	for _, m := range c.ms {
		c.due = c.due || m.stale
	}
	return false
}

// shrink evicts all but the newest n records, rebuilds the sums and marks
// every member stale.
func (c *covLearner) shrink(n int) bool {
	n = max(n, 0)
	if c.ts.ring.Len() <= n {
		return false
	}
	for c.ts.ring.Len() > n {
		c.evict()
	}
	c.lazy = false
	c.rebuild()
	if c.ts.ring.Len() == 0 {
		return false
	}
	// The solve of every member waits for the next run (Add or Idle):
	// until then a read solves a copy on the shrunk window.
	for _, m := range c.ms {
		m.stale = true
	}
	return c.prepare()
}

// solve solves every member on the scale of the last refresh (ts.mu,
// ts.inv), each from its previous solution (on the first solve, from the
// member above it: warm starts down the path), to gramTarget.
func (c *covLearner) solve() { c.solveTo(gramTarget) }

// solveTo is solve to KKT target.
func (c *covLearner) solveTo(target float64) {
	c.due, c.lazy, c.stale, c.sinceSolve = false, false, false, 0
	for _, m := range c.ms {
		m.stale = false
	}
	if c.ts.ring.Len() == 0 || !(c.sw > 0) {
		return
	}
	ybar := c.system(c.ts.inv)
	c.sys, c.ybar = true, ybar
	for i, m := range c.ms {
		if !c.solved && i > 0 {
			copy(m.theta, c.ms[i-1].theta)
		}
		m.kkt = c.solver.solve(m.theta, m.lambda, c.alpha, target)
		m.b = ybar
	}
	c.solved = true
}

// system writes the standardized Gram matrix and cross-products of the
// window, on inverse scale inv, into the solver, and returns the
// window's weighted mean label. With m = sx/W the mean of x − cx,
// C = S/W − m mᵀ is the window's covariance; G_jk = C_jk·inv_j·inv_k and
// c_j = (sxy_j/W − m_j·sy/W)·inv_j. A constant feature (inv 0) has a zero
// row and column.
func (c *covLearner) system(inv []float64) float64 {
	d := c.ts.d
	c.sys = false
	g, cv, mx := c.solver.g, c.solver.c, c.solver.r
	rw := 1 / c.sw
	for j := range d {
		mx[j] = c.sx[j] * rw
	}
	my := c.sy * rw
	for j := range d {
		ij := inv[j]
		row := c.sxx[j*d : (j+1)*d]
		for k := j; k < d; k++ {
			v := (row[k]*rw - mx[j]*mx[k]) * ij * inv[k]
			g[j*d+k], g[k*d+j] = v, v
		}
		cv[j] = (c.sxy[j]*rw - mx[j]*my) * ij
	}
	return c.cy + my
}

// lambdaMax returns max_j |c_j|/α on the scale of the last refresh, from
// the shifted sums (no cancellation of large raw sums).
func (c *covLearner) lambdaMax(alpha float64) float64 {
	if !(c.sw > 0) {
		return 0
	}
	w, inv := c.sw, c.ts.inv
	my := c.sy / w
	var m float64
	for j, v := range inv {
		m = max(m, math.Abs(c.sxy[j]/w-c.sx[j]/w*my)*v)
	}
	return m / alpha
}

// converge rebuilds the sums, re-anchors the grid and solves every member
// to min(tol/1000, gramTarget); it reports whether every member's KKT is
// at most tol.
func (c *covLearner) converge(l *Ladder, tol float64, _ int) bool {
	if c.ts.ring.Len() == 0 {
		return true
	}
	c.rebuild()
	c.prepare()
	l.reanchor(c.lambdaMax(l.alpha0))
	c.solveTo(min(tol/1000, gramTarget))
	for _, m := range c.ms {
		if !(m.kkt <= tol) {
			return false
		}
	}
	return true
}
