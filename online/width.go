package online

import (
	"fmt"
	"math"
)

// A ladder's width (Features) can grow up to Options.MaxFeatures, and a
// column can be reset to "never seen" (its slot handed to another feature):
//
//   - Grow re-lays out every per-feature buffer once (the window's rows,
//     the members' coefficient and sum matrices, the scales, the held-out
//     ring through Holdout.Grow). A new column is "fresh": never seen, so
//     the rows already in the window hold 0 there, as a column of a wider
//     ladder that has not seen a value yet always did.
//   - The first present value v of a fresh column seeds it: every row in
//     the window takes v (the value a missing entry is imputed with, the
//     column's mean, is v from then on), so the column's mean starts at v
//     with no spread, and its statistics start from its first value
//     instead of being dragged towards 0 by rows that never had one. On an
//     empty window seeding changes nothing, so a stream whose features are
//     all present from its first record trains exactly as a ladder of that
//     width from the start.
//   - ResetFeature makes a column fresh again: its values in the window,
//     its statistics and scales, and every member's coefficient and sum
//     for it go to 0.

// Grow widens the ladder to n features; it does nothing when n ≤
// Features(). The new columns are fresh (see ResetFeature). Grow allocates
// and costs O(window·n): a caller that grows often should grow in steps
// (the pipeline doubles). It panics if n > MaxFeatures().
func (l *Ladder) Grow(n int) {
	if n <= l.d {
		return
	}
	if n > l.opt.MaxFeatures {
		panic(fmt.Sprintf("online: Grow(%d) past MaxFeatures %d", n, l.opt.MaxFeatures))
	}
	l.lrn.grow(n)
	l.fill = l.lrn.fill()
	l.xbuf = widen(l.xbuf, n)
	for range n - l.d {
		l.fresh = append(l.fresh, true)
	}
	l.nfresh += n - l.d
	l.d = n
	l.grid.respec = true // a ridge grid's degrees of freedom span the new width
}

// Check validates r as Add does, but for a record of any width up to
// MaxFeatures (the width the ladder may grow to): it returns the error Add
// would return for its values, label or weight, and changes nothing. A
// caller that grows the ladder for a record checks it first, so that a
// record Add would refuse does not change the ladder's layout either.
func (l *Ladder) Check(r Record) error {
	if len(r.X) > l.opt.MaxFeatures {
		return fmt.Errorf("%w: got %d, at most %d", ErrDimension, len(r.X), l.opt.MaxFeatures)
	}
	if err := checkFeatures(r.X); err != nil {
		return err
	}
	return checkLabel(&r, l.opt.Loss, l.dom)
}

// MaxFeatures returns the width Grow may reach.
func (l *Ladder) MaxFeatures() int { return l.opt.MaxFeatures }

// ResetFeature forgets column j, whose feature has left (its slot is about
// to be reused): every member's coefficient for it is set to 0, and its
// values in the window, its running statistics, scales and gradient sums
// are cleared, so that the next feature in the slot starts fresh. It panics
// if j is out of range.
func (l *Ladder) ResetFeature(j int) {
	if j < 0 || j >= l.d {
		panic(fmt.Sprintf("online: ResetFeature(%d) of %d features", j, l.d))
	}
	l.lrn.reset(j)
	if !l.fresh[j] {
		l.fresh[j] = true
		l.nfresh++
	}
}

// Fresh reports whether column j has not had a value since the ladder was
// made, grown to include it, or reset it.
func (l *Ladder) Fresh(j int) bool { return l.fresh[j] }

// seedFresh seeds each fresh column that record x (validated) has a value
// for (see Grow).
func (l *Ladder) seedFresh(x []float64) {
	for j, f := range l.fresh {
		if v := x[j]; f && v == v {
			l.lrn.seed(j, v)
			l.fresh[j] = false
			l.nfresh--
		}
	}
}

// widen returns v lengthened to n with zeros (a new slice; v is unchanged).
func widen(v []float64, n int) []float64 {
	w := make([]float64, n)
	copy(w, v)
	return w
}

// widenRows re-lays out a row-major matrix of rows of d values as rows of
// n ≥ d values, the new columns set to fill.
func widenRows(v []float64, d, n int, fill float64) []float64 {
	rows := 0
	if d > 0 {
		rows = len(v) / d
	}
	w := make([]float64, rows*n)
	for r := range rows {
		row := w[r*n : (r+1)*n]
		copy(row, v[r*d:(r+1)*d])
		if fill != 0 {
			for j := d; j < n; j++ {
				row[j] = fill
			}
		}
	}
	return w
}

// grow widens the window to n features: every row keeps its values and
// holds 0 in the new columns.
func (ts *trainset) grow(n int) {
	ts.x = widenRows(ts.x, ts.d, n, 0)
	for _, p := range []*[]float64{&ts.sc.mean, &ts.sc.m2, &ts.sc.sxy, &ts.mu, &ts.sd, &ts.inv, &ts.refMu, &ts.refInv} {
		*p = widen(*p, n)
	}
	ts.d = n
}

// setColumn sets column j of every row to v and its statistics to those
// of a column holding v in every row: mean v, no spread, Σ w y x_j = v·Σ w y.
// The scales (working and reference) read 0 (constant) until the next
// refresh or resync; the smoothness bound stays an upper bound, as it only
// loses a term.
func (ts *trainset) setColumn(j int, v float64) {
	for s := 0; s < len(ts.x); s += ts.d {
		ts.x[s+j] = v
	}
	ts.sc.mean[j], ts.sc.m2[j], ts.sc.sxy[j] = v, 0, v*ts.sc.wy
	if v == 0 {
		ts.sc.sxy[j] = 0
	}
	ts.mu[j], ts.sd[j], ts.inv[j], ts.refMu[j], ts.refInv[j] = 0, 0, 0, 0, 0
}

// grow widens the learner to n features.
func (s *sagaLearner) grow(n int) {
	s.settle()
	d, ts := s.ts.d, s.ts
	ts.grow(n)
	s.xt, s.xn, s.xa = widen(s.xt, n), widen(s.xn, n), widen(s.xa, n)
	s.theta, s.sums = widenRows(s.theta, d, n, 0), widenRows(s.sums, d, n, 0)
	for k, m := range s.ms {
		m.theta, m.s = s.theta[k*n:(k+1)*n:(k+1)*n], s.sums[k*n:(k+1)*n:(k+1)*n]
	}
	s.scr = newScratch(n, ts.ring.Cap())
	s.primed, s.first = false, -1
}

// reset clears column j (Ladder.ResetFeature).
func (s *sagaLearner) reset(j int) { s.setCol(j, 0) }

// seed fills column j, fresh, with its first value v (Ladder.Grow).
func (s *sagaLearner) seed(j int, v float64) {
	if s.ts.ring.Len() == 0 {
		return
	}
	s.setCol(j, v)
}

// setCol sets column j of the window to v, every member's coefficient for
// it to 0 and its raw gradient sum to S_j = Σ g_i v = v·G.
func (s *sagaLearner) setCol(j int, v float64) {
	s.settle()
	s.ts.setColumn(j, v)
	for _, m := range s.ms {
		m.theta[j], m.s[j] = 0, v*m.gsum
		if v == 0 {
			m.s[j] = 0
		}
	}
	s.primed, s.first = false, -1
}

// grow widens the decay learner to n features.
func (l *decayLearner) grow(n int) {
	last := make([]int64, n)
	copy(last, l.last)
	for j := len(l.last); j < n; j++ {
		last[j] = l.clock
	}
	l.last = last
	for _, p := range []*[]float64{&l.fw, &l.mean, &l.m2, &l.ymean, &l.cxy, &l.sd, &l.inv, &l.xt} {
		*p = widen(*p, n)
	}
	l.idx = make([]int, 0, n)
	for _, m := range l.ms {
		m.theta, m.z, m.n, m.sqn = widen(m.theta, n), widen(m.z, n), widen(m.n, n), widen(m.sqn, n)
	}
}

// reset clears feature j's scale and every member's state for it.
func (l *decayLearner) reset(j int) {
	l.last[j] = l.clock
	for _, v := range [][]float64{l.fw, l.mean, l.m2, l.ymean, l.cxy, l.sd, l.inv} {
		v[j] = 0
	}
	for _, m := range l.ms {
		m.theta[j], m.z[j], m.n[j], m.sqn[j] = 0, 0, 0, 0
	}
}

// seed does nothing: the decay learner's running scale of a feature
// already starts from its first present value.
func (l *decayLearner) seed(int, float64) {}

// Grow widens the ring to n features, like Ladder.Grow; the records held
// read as missing (NaN) in the new columns. It does nothing when n ≤
// Features().
func (h *Holdout) Grow(n int) {
	if n <= h.d {
		return
	}
	h.x = widenRows(h.x, h.d, n, math.NaN())
	h.coef = widen(h.coef, n)
	for i := range h.n {
		h.miss[h.slot(i)] = true
	}
	h.d = n
}

// ResetFeature marks feature j missing (NaN) in every record held, as for
// Ladder.ResetFeature. It panics if j is out of range.
func (h *Holdout) ResetFeature(j int) {
	if j < 0 || j >= h.d {
		panic(fmt.Sprintf("online: Holdout.ResetFeature(%d) of %d features", j, h.d))
	}
	for i := range h.n {
		s := h.slot(i)
		h.x[s*h.d+j] = math.NaN()
		h.miss[s] = true
	}
}

// grow widens the gram learner to n features: the new columns are 0 in
// every row, so their shift is 0 and their sums are 0.
func (c *covLearner) grow(n int) {
	d, ts := c.ts.d, c.ts
	ts.grow(n)
	c.theta = widenRows(c.theta, d, n, 0)
	for k, m := range c.ms {
		m.theta = c.theta[k*n : (k+1)*n : (k+1)*n]
	}
	sxx := make([]float64, n*n)
	for j := range d {
		copy(sxx[j*n:j*n+d], c.sxx[j*d:(j+1)*d])
	}
	c.sxx = sxx
	for _, p := range []*[]float64{&c.cx, &c.sx, &c.sxy} {
		*p = widen(*p, n)
	}
	mk := func() []float64 { return make([]float64, n) }
	c.solver = newGramSolver(n)
	c.xc, c.xo, c.mu, c.sd, c.inv, c.thetaR, c.thetaP = mk(), mk(), mk(), mk(), mk(), mk(), mk()
	c.stale, c.sys = true, false
}

// reset clears column j (Ladder.ResetFeature).
func (c *covLearner) reset(j int) { c.setCol(j, 0) }

// seed fills column j, fresh, with its first value v (Ladder.Grow).
func (c *covLearner) seed(j int, v float64) {
	if c.ts.ring.Len() == 0 {
		return
	}
	c.setCol(j, v)
}

// setCol sets column j of the window to v and every member's coefficient
// for it to 0, and marks every member stale (its other coefficients were
// solved with the column: a read solves it again). The shift of column j
// moves to v, so its shifted values, and with them its row and column of
// the sums, are exactly 0.
func (c *covLearner) setCol(j int, v float64) {
	c.ts.setColumn(j, v)
	d := c.ts.d
	c.cx[j], c.sx[j], c.sxy[j] = v, 0, 0
	for k := range d {
		c.sxx[j*d+k], c.sxx[k*d+j] = 0, 0
	}
	for _, m := range c.ms {
		m.theta[j], m.stale = 0, true
	}
	c.stale, c.sys = true, false
}
