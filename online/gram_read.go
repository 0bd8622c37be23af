package online

import "math"

// The gram learner's reads: a stale member as read (read) or readied for
// the record path (ensure, Ladder.Ready), and the exact reads Ladder.KKT,
// Optimum, OptimumPath, ModelKKT and the ridge spectrum's Gram matrix.
// Apart from ensure they change only scratch buffers, never the learner's
// state: a read of a window that moved since the members' solve solves a
// copy from the current sums.

// ensure solves stale member i from the current sums on the working scale
// (the scale of the last refresh, on which every member read is), warm
// from its own last solution, to gramTarget, and keeps the solution
// (Ladder.Ready).
func (c *covLearner) ensure(i int) {
	m := c.ms[i]
	if !m.stale {
		return
	}
	m.stale = false
	if c.ts.ring.Len() == 0 || !(c.sw > 0) {
		return
	}
	m.b, m.kkt = c.solveStale(m, m.theta)
}

// read returns stale member i as a read sees it: what ensure would make of
// it now, solved in scratch (thetaP, valid until the next read) and not
// kept, so that a read changes nothing the ladder computes later (the
// daemon reads its members on a clock, and its models must not depend on
// when).
func (c *covLearner) read(i int) (float64, []float64) {
	m := c.ms[i]
	if c.ts.ring.Len() == 0 || !(c.sw > 0) {
		return m.b, m.theta
	}
	copy(c.thetaP, m.theta)
	b, _ := c.solveStale(m, c.thetaP)
	return b, c.thetaP
}

// solveStale solves member m in th (its coefficients or a copy) from the
// current sums on the working scale and returns the intercept and the KKT
// violation. The system G, c is built once for all the members solved
// until the sums or the scale change (sys). G and c are centred on the
// window's current means, the working scale on the means of the last
// refresh: the intercept on that scale is ȳ − Σ θ_j (x̄_j − μ_j)/s_j, the
// minimizer of F over b for θ (it is ȳ when the means have not moved).
func (c *covLearner) solveStale(m *gramMember, th []float64) (float64, float64) {
	if !c.sys {
		c.ybar = c.system(c.ts.inv)
		c.sys = true
	}
	kkt := c.solver.solve(th, m.lambda, c.alpha, gramTarget)
	b, rw := c.ybar, 1/c.sw
	for j, t := range th {
		if t != 0 {
			b -= t * (c.cx[j] + c.sx[j]*rw - c.ts.mu[j]) * c.ts.inv[j]
		}
	}
	return b, kkt
}

// exactScale fills the scratch scale with the window's exact running
// scale (the scale of Ladder.KKT and Optimum).
func (c *covLearner) exactScale() {
	sc := &c.ts.sc
	for j := range c.mu {
		c.mu[j] = sc.mean[j]
		c.sd[j], c.inv[j] = sc.scale(j)
	}
}

// kkt is Ladder.KKT: member i's violation on the current window, from the
// sums (O(d²)).
func (c *covLearner) kkt(i int) float64 {
	if c.ts.ring.Len() == 0 || !(c.sw > 0) {
		return 0
	}
	m := c.ms[i]
	b, th := m.params()
	c.exactScale()
	ybar := c.system(c.inv)
	return max(math.Abs(b-ybar), c.solver.violation(th, m.lambda, c.alpha))
}

// recordsKKT returns the KKT violation of intercept b and coefficients th
// at λ on the window's records, on the exact scale: one pass, O(n·d). A
// coefficient of a feature constant on the window counts as 0.
func (c *covLearner) recordsKKT(b float64, th []float64, lam float64) float64 {
	ts := c.ts
	c.exactScale()
	grad, xs := c.xo, c.xc // scratch of add, free outside it
	clear(grad)
	c.masked(th)
	var gb float64
	for k, sl := range ts.order() {
		r := ts.ring.At(k)
		stdRow(xs, ts.row(sl), c.mu, c.inv)
		g := r.w * (b + dot(c.thetaR, xs) - r.y)
		gb += g
		axpy(g, xs, grad)
	}
	w := ts.sc.w
	la, lr := lam*c.alpha, lam*(1-c.alpha)
	worst := math.Abs(gb / w)
	for j, t := range c.thetaR {
		if c.inv[j] == 0 {
			continue
		}
		gj := grad[j] / w
		if t != 0 {
			worst = max(worst, math.Abs(gj+la*math.Copysign(1, t)+lr*t))
		} else {
			worst = max(worst, math.Abs(gj)-la)
		}
	}
	return worst
}

// optimum returns member i's exact fit on the current window to target:
// the member itself when nothing changed since it was solved, else a
// solve from it on the current sums and exact scale. The learner is not
// changed.
func (c *covLearner) optimum(l *Ladder, i int, target float64) (Model, float64) {
	m := c.ms[i]
	if !c.stale && !m.stale && m.kkt <= target {
		return l.Model(i), m.kkt
	}
	c.exactScale()
	ybar := c.system(c.inv)
	c.masked(m.theta)
	kkt := c.solver.solve(c.thetaR, m.lambda, c.alpha, target)
	return c.model(l, i, ybar, c.thetaR), kkt
}

// masked copies th into the scratch thetaR with the coefficients of the
// features constant on the window (inverse scale 0 on the exact scale,
// exactScale) set to 0.
func (c *covLearner) masked(th []float64) {
	for j, v := range c.inv {
		if v == 0 {
			c.thetaR[j] = 0
		} else {
			c.thetaR[j] = th[j]
		}
	}
}

// path is OptimumPath for the gram learner: every member's exact fit on
// the current window, from one build of G and c (O(d²)) and a solve per
// member from its last solution; the members themselves when nothing
// changed since their solve. The learner is not changed.
func (c *covLearner) path(l *Ladder, o *ExactOptions, dst []Optimum) []Optimum {
	fresh := !c.stale
	for _, m := range c.ms {
		fresh = fresh && !m.stale && m.kkt <= o.Target
	}
	if fresh {
		for i, m := range c.ms {
			dst = append(dst, Optimum{Model: l.Model(i), KKT: m.kkt, Converged: m.kkt <= o.Tol})
		}
		return dst
	}
	c.exactScale()
	ybar := c.system(c.inv)
	for i, m := range c.ms {
		c.masked(m.theta)
		kkt := c.solver.solve(c.thetaR, m.lambda, c.alpha, o.Target)
		dst = append(dst, Optimum{Model: c.model(l, i, ybar, c.thetaR), KKT: kkt, Converged: kkt <= o.Tol})
	}
	return dst
}

// model returns member i's Model with intercept b and coefficients th on
// the scratch (exact) scale. It does not read the member (which would
// solve a stale one and overwrite the solver's system).
func (c *covLearner) model(l *Ladder, i int, b float64, th []float64) Model {
	return l.modelOf(i, b, th, c.mu, c.sd, c.inv)
}

// gram is gramLearner.gram (the ridge grid's spectrum) from the sums, on
// the exact scale: O(d²), with no pass over the records.
func (c *covLearner) gram(out, _ []float64, _ bool) bool {
	clear(out)
	if c.ts.ring.Len() == 0 || !(c.sw > 0) {
		return false
	}
	c.exactScale()
	c.system(c.inv)
	copy(out, c.solver.g)
	return true
}

var _ gramLearner = (*covLearner)(nil)
