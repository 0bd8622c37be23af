package online

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// DefaultKKT is ExactOptions.Tol when it is 0: the largest KKT violation,
// on the standardized scale, that an exact fit may keep.
const DefaultKKT = 1e-6

// defaultRounds is ExactOptions.Rounds when it is 0.
const defaultRounds = 30

// ExactOptions bounds an exact fit; nil or the zero value gives the
// defaults shown.
type ExactOptions struct {
	// Tol is the KKT tolerance on the standardized scale (Ladder.KKT);
	// default DefaultKKT.
	Tol float64
	// Target is the KKT violation the fit iterates to before it stops,
	// ≤ Tol; default Tol/1000. The margin below Tol is for the support: a
	// violation of Tol still allows a coefficient of about Tol/ℓ” where
	// the optimum has an exact zero (measured: 2.7e-6 on a logistic
	// problem at KKT 5.8e-7), and proximal Newton's fast local
	// convergence makes the margin cost one or two rounds.
	Target float64
	// Rounds caps the proximal Newton rounds (each one pass over the
	// window, plus one to build the active set's matrix when the point
	// moves); default 30. An exact fit that runs out says so (Converged
	// false, KKT above Tol).
	Rounds int
}

// Optimum is the exact fit of one λ on the current train window.
type Optimum struct {
	// Model is the fit, on the window's exact scale (the running mean and
	// population std of the records now in the window).
	Model Model
	// KKT is the largest KKT violation of Model on the window
	// (standardized scale, as Ladder.KKT), measured after the last move.
	KKT float64
	// Converged reports KKT ≤ the tolerance.
	Converged bool
	// Passes counts the passes over the window the fit took (gradient
	// passes and active-set matrix passes).
	Passes int
}

// Optimum returns the minimizer of F at member i's λ on the current
// window, on the window's exact scale, to a KKT tolerance, with exact
// zeros. It starts from warm when warm is non-nil and has the ladder's
// width (a previous Optimum's Model: the window moves by few records
// between two calls, so few rounds remain), else from member i. The ladder
// is not changed: the streaming members stay as they are. Each round is
// one pass over the window that measures the gradient and the KKT
// violation; while it is above the tolerance, a proximal Newton step is
// taken on the active set (the nonzero coefficients and the violators),
// whose quadratic model, exact for the squared loss, is minimized by
// coordinate descent with covariance updates on its small Gram matrix
// and finished by a Cholesky solve with the signs held (Friedman, Hastie &
// Tibshirani 2010, §2; Lee, Sun & Saunders 2014 for the step length of the
// logistic loss). Cost per round O(n·d), plus O(n·|A|²) when the active set
// A moves the point; independent of K. For the decay learner (no window)
// the result has KKT NaN and Converged false, with member i's model.
func (l *Ladder) Optimum(i int, warm *Model, o *ExactOptions) Optimum {
	var opt ExactOptions
	if o != nil {
		opt = *o
	}
	if !(opt.Tol > 0) {
		opt.Tol = DefaultKKT
	}
	if opt.Rounds <= 0 {
		opt.Rounds = defaultRounds
	}
	if !(opt.Target > 0) || opt.Target > opt.Tol {
		opt.Target = opt.Tol / 1000
	}
	if c, ok := l.lrn.(*covLearner); ok && c.ts.ring.Len() > 0 {
		m, kkt := c.optimum(l, i, opt.Target)
		return Optimum{Model: m, KKT: kkt, Converged: kkt <= opt.Tol}
	}
	s, ok := l.lrn.(*sagaLearner)
	if !ok || s.ts.ring.Len() == 0 {
		return Optimum{Model: l.Model(i), KKT: math.NaN()}
	}
	e := newExact(s, l.lambdas[i])
	b, th := l.members[i].params()
	if warm != nil && len(warm.Standardized) == l.d {
		b, th = warm.StdIntercept, warm.Standardized
	}
	e.b = b
	for j, t := range th {
		if e.inv[j] != 0 { // a feature constant on the window has θ_j = 0
			e.theta[j] = t
		}
	}
	kkt, passes := e.solve(opt.Target, opt.Rounds)
	m := l.Model(i)
	m.StdIntercept, m.Intercept = e.b, e.b
	copy(m.Standardized, e.theta)
	for j, t := range e.theta {
		c := t * e.inv[j]
		m.Coef[j] = c
		m.Intercept -= c * e.mu[j]
		m.Mean[j], m.Std[j] = e.mu[j], e.sd[j]
	}
	return Optimum{Model: m, KKT: kkt, Converged: kkt <= opt.Tol, Passes: passes}
}

// ModelKKT returns the largest KKT violation (as KKT measures it) of model
// m, at its λ, on the current window, from one pass over the window's
// records (O(n·d)) whatever else the learner keeps: for the gram learner,
// whose fits come from the window's sums, it checks them against the
// records themselves. m is an Optimum's Model of this ladder (its
// standardized intercept and coefficients on the window's exact scale).
// It is NaN for the decay learner, an empty window or a model of another
// width, and changes nothing.
func (l *Ladder) ModelKKT(m *Model) float64 {
	if len(m.Standardized) != l.d {
		return math.NaN()
	}
	switch lrn := l.lrn.(type) {
	case *covLearner:
		if lrn.ts.ring.Len() > 0 && lrn.sw > 0 {
			return lrn.recordsKKT(m.StdIntercept, m.Standardized, m.Lambda)
		}
	case *sagaLearner:
		if lrn.ts.ring.Len() > 0 {
			e := newExact(lrn, m.Lambda)
			e.b = m.StdIntercept
			for j, t := range m.Standardized {
				if e.inv[j] != 0 {
					e.theta[j] = t
				}
			}
			e.pass()
			return e.violation()
		}
	}
	return math.NaN()
}

// exact is the state of one exact fit on a SAGA learner's window.
type exact struct {
	s            *sagaLearner
	lam, alpha   float64
	b            float64
	theta        []float64 // d
	mu, sd, inv  []float64 // the window's exact scale
	grad, xs     []float64 // d: gradient of the smooth part; a standardized row
	eta, q, rho  []float64 // n: predictor, w·ℓ”, w·ℓ'
	f            float64   // smooth part of F at (b, θ)
	gb           float64   // ∂F/∂b
	act          []int     // the active set of the last step
	passes       int
	floor        float64 // least curvature weight of the quadratic model
	quad, closed bool    // squared loss: the quadratic model is exact
}

func newExact(s *sagaLearner, lam float64) *exact {
	d, n := s.ts.d, s.ts.ring.Len()
	mk := func(k int) []float64 { return make([]float64, k) }
	e := &exact{
		s: s, lam: lam, alpha: s.alpha, theta: mk(d), mu: mk(d), sd: mk(d), inv: mk(d),
		grad: mk(d), xs: mk(d), eta: mk(n), q: mk(n), rho: mk(n),
		floor: 1e-5 * s.curv, quad: s.loss.Quadratic(),
	}
	for j := range d {
		e.mu[j] = s.ts.sc.mean[j]
		e.sd[j], e.inv[j] = s.ts.sc.scale(j)
	}
	return e
}

// row returns the features of the k-th record of the window (slot sl),
// including an admission whose row is still pending.
func (e *exact) row(sl int) []float64 {
	s := e.s
	if s.pending && sl == s.pslot {
		return s.pend
	}
	return s.ts.row(sl)
}

// solve runs rounds until the KKT violation is at most target or rounds
// are spent, and returns the violation at the final point and the passes.
func (e *exact) solve(target float64, rounds int) (float64, int) {
	e.pass()
	for r := 0; ; r++ {
		kkt := e.violation()
		if kkt <= target || r >= rounds {
			return kkt, e.passes
		}
		if !e.step(target) {
			return kkt, e.passes
		}
	}
}

// pass computes, at (b, θ), the predictors, the quadratic model's weights
// and gradients, the smooth part of F and its gradient: one pass over the
// window.
func (e *exact) pass() {
	e.passes++
	ts := e.s.ts
	clear(e.grad)
	var f, gb float64
	for k, sl := range ts.order() {
		r := ts.ring.At(k)
		x := e.row(sl)
		stdRow(e.xs, x, e.mu, e.inv)
		eta := e.b + dot(e.theta, e.xs)
		e.eta[k] = eta
		v, d1, d2 := e.derivs(r.y, eta)
		g := r.w * d1
		e.rho[k] = g
		e.q[k] = r.w * max(d2, e.floor)
		f += r.w * v
		gb += g
		axpy(g, e.xs, e.grad)
	}
	w := ts.sc.w
	for j := range e.grad {
		e.grad[j] /= w
	}
	e.f, e.gb = f/w, gb/w
}

// derivs returns ℓ(y, η), ℓ' and ℓ”; for the logistic loss from one
// exponential, e = exp(−|η|): σ(η) = 1/(1 + e) or e/(1 + e), and
// log(1 + e^η) = max(η, 0) + log1p(e), the stable forms of Loss.
func (e *exact) derivs(y, eta float64) (v, d1, d2 float64) {
	switch e.s.kind {
	case lossSquared:
		r := eta - y
		return r * r / 2, r, 1
	case lossLogistic:
		x := math.Exp(-math.Abs(eta))
		p := 1 / (1 + x)
		if eta < 0 {
			p = x / (1 + x)
		}
		return max(eta, 0) + math.Log1p(x) - y*eta, p - y, p * (1 - p)
	}
	l := e.s.loss
	return l.Value(y, eta), l.Deriv(y, eta), l.SecondDeriv(y, eta)
}

// violation returns the largest KKT violation at the last pass (as
// sagaLearner.violation, with the pass's gradient).
func (e *exact) violation() float64 {
	la, lr := e.lam*e.alpha, e.lam*(1-e.alpha)
	worst := math.Abs(e.gb)
	for j, t := range e.theta {
		if e.inv[j] == 0 {
			continue
		}
		g := e.grad[j]
		if t != 0 {
			worst = max(worst, math.Abs(g+la*math.Copysign(1, t)+lr*t))
		} else {
			worst = max(worst, math.Abs(g)-la)
		}
	}
	return worst
}

// step takes one proximal Newton step on the active set and makes a new
// pass at the new point; it reports false when the point could not move.
func (e *exact) step(tol float64) bool {
	la := e.lam * e.alpha
	e.act = e.act[:0]
	for j, t := range e.theta {
		if e.inv[j] != 0 && (t != 0 || math.Abs(e.grad[j]) > la) {
			e.act = append(e.act, j)
		}
	}
	h, c := e.gram()
	delta := e.subproblem(h, c, tol)
	b0, f0, pen0 := e.b, e.f, e.penalty()
	th0 := append([]float64(nil), e.theta...)
	for t := 1.0; t > 1e-10; t /= 2 {
		e.b = b0 + t*delta[0]
		for u, j := range e.act {
			e.theta[j] = th0[j] + t*delta[u+1]
			if t < 1 && math.Signbit(e.theta[j]) != math.Signbit(th0[j]) && th0[j] != 0 {
				e.theta[j] = 0 // keep a halved step from crossing zero
			}
		}
		e.pass()
		if e.quad || e.f+e.penalty() <= f0+pen0+1e-15*math.Abs(f0+pen0) {
			return true
		}
	}
	e.b = b0
	copy(e.theta, th0)
	e.pass()
	return false
}

// penalty returns the penalty at θ.
func (e *exact) penalty() float64 {
	var l1, l2 float64
	for _, t := range e.theta {
		l1 += math.Abs(t)
		l2 += t * t
	}
	return e.lam * (e.alpha*l1 + (1-e.alpha)/2*l2)
}

// exactBlock is the number of records exact.gram stages at a time.
const exactBlock = 256

// gram returns the quadratic model's Hessian on Z = [1, x̃_A] (row-major
// k×k, both triangles filled, k = |A|+1), ZᵀQZ/W, and its gradient at the
// current point, Zᵀρ/W: one pass over the window, O(n·k²). The records
// are staged in blocks of exactBlock as columns (Z's columns and Q·Z's), so
// that each entry of the Hessian is one long dot product per block.
func (e *exact) gram() (h, c []float64) {
	e.passes++
	ts := e.s.ts
	k := len(e.act) + 1
	h, c = make([]float64, k*k), make([]float64, k)
	z := make([]float64, k*exactBlock)  // column u of the block at z[u·B:]
	qz := make([]float64, k*exactBlock) // the same, times q
	order := ts.order()
	for lo := 0; lo < len(order); lo += exactBlock {
		blk := order[lo:min(lo+exactBlock, len(order))]
		nb := len(blk)
		for r, sl := range blk {
			x := e.row(sl)
			q := e.q[lo+r]
			z[r], qz[r] = 1, q
			for u, j := range e.act {
				v := (x[j] - e.mu[j]) * e.inv[j]
				z[(u+1)*exactBlock+r], qz[(u+1)*exactBlock+r] = v, q*v
			}
		}
		for u := range k {
			zu := qz[u*exactBlock : u*exactBlock+nb]
			for v := u; v < k; v++ {
				h[u*k+v] += dot(zu, z[v*exactBlock:v*exactBlock+nb])
			}
		}
	}
	w := ts.sc.w
	for u := range k {
		for v := u; v < k; v++ {
			h[u*k+v] /= w
			h[v*k+u] = h[u*k+v]
		}
	}
	c[0] = e.gb
	for u, j := range e.act {
		c[u+1] = e.grad[j]
	}
	return h, c
}

// subproblem minimizes cᵀΔ + ½ΔᵀHΔ + λ Σ_A (α|θ_j+Δ_j| + (1−α)/2 (θ_j+Δ_j)²)
// over Δ (Δ_0 the intercept, unpenalized), starting at Δ = 0, and returns
// Δ (subproblemFrom does the work).
func (e *exact) subproblem(h, c []float64, tol float64) []float64 {
	k := len(c)
	beta := make([]float64, k) // beta[u] = θ_A + Δ (beta[0] = Δ_0)
	for u, j := range e.act {
		beta[u+1] = e.theta[j]
	}
	e.subproblemFrom(h, c, beta, tol)
	delta := make([]float64, k)
	delta[0] = beta[0]
	for u, j := range e.act {
		delta[u+1] = beta[u+1] - e.theta[j]
	}
	return delta
}

// subproblemFrom minimizes the subproblem over beta = (Δ_0, θ_A + Δ) from
// the given beta, in place, by cyclic coordinate descent with covariance
// updates (the gradient g = c + H(β − β⁰) kept current in O(k) per move,
// β⁰ = (0, θ_A) the expansion point), finished by an exact solve on its
// support with the signs held (activeSystem).
func (e *exact) subproblemFrom(h, c, beta []float64, tol float64) {
	k := len(c)
	la, lr := e.lam*e.alpha, e.lam*(1-e.alpha)
	g := append([]float64(nil), c...)
	for u, j := range e.act {
		if d := beta[u+1] - e.theta[j]; d != 0 {
			axpy(d, h[(u+1)*k:(u+2)*k], g)
		}
	}
	if beta[0] != 0 {
		axpy(beta[0], h[:k], g)
	}
	move := func(u int, nw float64) {
		if dv := nw - beta[u]; dv != 0 {
			beta[u] = nw
			axpy(dv, h[u*k:u*k+k], g)
		}
	}
	coord := func(u int) float64 {
		hu := h[u*k+u]
		if u == 0 {
			v := math.Abs(g[0])
			if hu > 0 {
				move(0, beta[0]-g[0]/hu)
			}
			return v
		}
		old := beta[u]
		viol := math.Abs(g[u]) - la
		if old != 0 {
			viol = math.Abs(g[u] + la*math.Copysign(1, old) + lr*old)
		}
		z := hu*old - g[u]
		move(u, softThreshold(z, la)/(hu+lr))
		return viol
	}
	sub := tol / 100
	for sweep := range 2000 {
		worst := 0.0
		for u := range k {
			worst = max(worst, coord(u))
		}
		if worst <= sub {
			break
		}
		if sweep%20 == 19 {
			e.activeSystem(h, c, beta, g)
		}
	}
	e.activeSystem(h, c, beta, g)
}

// activeSystem replaces beta, on its support S with the signs s held, by
// the solution of the subproblem's stationarity equations
// (H_SS + λ(1−α)I)β_S = H_S·β⁰ − c_S − λα·s, where β⁰ is the start point
// (θ_A, 0); it is kept only when every sign survives and it is finite,
// and then g is recomputed. Coordinate descent alone approaches this point
// slowly when features are strongly correlated.
func (e *exact) activeSystem(h, c, beta, g []float64) {
	k := len(c)
	la, lr := e.lam*e.alpha, e.lam*(1-e.alpha)
	var sup []int
	for u := range k {
		if u == 0 || beta[u] != 0 {
			sup = append(sup, u)
		}
	}
	// β⁰ on the full vector: the point Δ = 0.
	b0 := make([]float64, k)
	for u, j := range e.act {
		b0[u+1] = e.theta[j]
	}
	m := len(sup)
	a := mat.NewSymDense(m, nil)
	rhs := mat.NewVecDense(m, nil)
	for p, u := range sup {
		v := -c[u]
		for w := range k {
			v += h[u*k+w] * b0[w]
		}
		if u > 0 {
			v -= la * math.Copysign(1, beta[u])
		}
		rhs.SetVec(p, v)
		for q := p; q < m; q++ {
			x := h[u*k+sup[q]]
			if q == p && u > 0 {
				x += lr
			}
			a.SetSym(p, q, x)
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(a) {
		return
	}
	var sol mat.VecDense
	if ch.SolveVecTo(&sol, rhs) != nil {
		return
	}
	for p, u := range sup {
		v := sol.AtVec(p)
		if math.IsNaN(v) || math.IsInf(v, 0) || (u > 0 && (v == 0 || math.Signbit(v) != math.Signbit(beta[u]))) {
			return
		}
	}
	for p, u := range sup {
		beta[u] = sol.AtVec(p)
	}
	// g = c + H(β − β⁰)
	for u := range k {
		v := c[u]
		for w := range k {
			v += h[u*k+w] * (beta[w] - b0[w])
		}
		g[u] = v
	}
}

// OptimumPath returns the exact fit of every member on the current
// window, member i's in dst[i] (dst resized to Size()), for the squared
// loss from the window's standardized Gram matrix G = X̃ᵀWX̃/W and
// cross-products c = X̃ᵀW(y − ȳ)/W, built in one pass (O(n·d²)), and
// coordinate descent with covariance updates down the path, each member
// warm-started from the one above it (Friedman, Hastie & Tibshirani 2010,
// §2.2 and §2.5): the members then cost O(d²) per sweep, independent of
// n. With features standardized on the window's exact scale the intercept
// is ȳ_w and drops out. Each fit's KKT is the violation of the conditions
// written with G and c (the same quantities as Ladder.KKT's, up to
// rounding in G). For the logistic loss, whose quadratic model changes
// with the point, it calls Optimum for each member instead; for the decay
// learner it returns the members with KKT NaN.
func (l *Ladder) OptimumPath(o *ExactOptions, dst []Optimum) []Optimum {
	dst = dst[:0]
	if c, ok := l.lrn.(*covLearner); ok && c.ts.ring.Len() > 0 {
		var opt ExactOptions
		if o != nil {
			opt = *o
		}
		if !(opt.Tol > 0) {
			opt.Tol = DefaultKKT
		}
		if !(opt.Target > 0) || opt.Target > opt.Tol {
			opt.Target = opt.Tol / 1000
		}
		return c.path(l, &opt, dst)
	}
	s, ok := l.lrn.(*sagaLearner)
	if !ok || s.ts.ring.Len() == 0 || !s.loss.Quadratic() {
		for i := range l.Size() {
			dst = append(dst, l.Optimum(i, nil, o))
		}
		return dst
	}
	tol, target := DefaultKKT, 0.0
	if o != nil && o.Tol > 0 {
		tol, target = o.Tol, o.Target
	}
	if !(target > 0) || target > tol {
		target = tol / 1000
	}
	e := newExact(s, 0)
	for j := range e.inv {
		if e.inv[j] != 0 {
			e.act = append(e.act, j)
		}
	}
	// The quadratic model at θ = 0, b = ȳ: ρ_i = w_i(ȳ − y_i), q_i = w_i.
	ybar := s.ts.sc.wy / s.ts.sc.w
	e.b = ybar
	e.pass()
	h, c := e.gram()
	k := len(c)
	beta := make([]float64, k) // [Δb, θ_A]
	for i := range l.Size() {
		e.lam = l.lambdas[i]
		e.subproblemFrom(h, c, beta, target)
		m := l.Model(i)
		clear(m.Standardized)
		for u, j := range e.act {
			m.Standardized[j] = beta[u+1]
		}
		m.StdIntercept = ybar + beta[0]
		m.Intercept = m.StdIntercept
		for j, t := range m.Standardized {
			cj := t * e.inv[j]
			m.Coef[j] = cj
			m.Intercept -= cj * e.mu[j]
			m.Mean[j], m.Std[j] = e.mu[j], e.sd[j]
		}
		kkt := e.pathKKT(h, c, beta)
		dst = append(dst, Optimum{Model: m, KKT: kkt, Converged: kkt <= tol, Passes: e.passes})
	}
	return dst
}

// pathKKT returns the KKT violation of beta on the quadratic model
// (h, c) at θ = 0: the gradient is c + H·beta.
func (e *exact) pathKKT(h, c, beta []float64) float64 {
	k := len(c)
	la, lr := e.lam*e.alpha, e.lam*(1-e.alpha)
	var worst float64
	for u := range k {
		g := c[u]
		for v := range k {
			g += h[u*k+v] * beta[v]
		}
		switch t := beta[u]; {
		case u == 0:
			worst = max(worst, math.Abs(g))
		case t != 0:
			worst = max(worst, math.Abs(g+la*math.Copysign(1, t)+lr*t))
		default:
			worst = max(worst, math.Abs(g)-la)
		}
	}
	return worst
}
