package online

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// sagaEpochs is the number of SAGA epochs (Len steps per member) Converge
// runs before it switches to the coordinate-descent polish.
const sagaEpochs = 2

// innerSweeps bounds the coordinate-descent sweeps of one polish epoch.
const innerSweeps = 200

// scratch holds the buffers of KKT and Converge, allocated once with the
// SAGA learner so that KKT does not allocate.
type scratch struct {
	mu, inv, grad, th0, th1 []float64 // d
	eta, rho, q             []float64 // window capacity
}

func newScratch(d, capacity int) scratch {
	mk := func(n int) []float64 { return make([]float64, n) }
	return scratch{mu: mk(d), inv: mk(d), grad: mk(d), th0: mk(d), th1: mk(d), eta: mk(capacity), rho: mk(capacity), q: mk(capacity)}
}

// KKT returns the largest violation of the optimality (KKT) conditions of
// member i on the current window, on the standardized scale of the window's
// exact running mean and std (Hastie, Tibshirani & Wainwright 2015, ch. 2
// and 5): with g_j = ∂/∂θ_j of the smooth part, |g_j + λα·sign θ_j +
// λ(1−α)θ_j| where θ_j ≠ 0, max(0, |g_j| − λα) where θ_j = 0, and |∂F/∂b|.
// It is 0 for an empty window and NaN for the decay learner (no window).
// O(n·d) (the gram learner: O(d²), from the window's sums; ModelKKT
// measures on the records); it changes nothing.
func (l *Ladder) KKT(i int) float64 { return l.lrn.kkt(i) }

// kkt is Ladder.KKT for the SAGA learner.
func (s *sagaLearner) kkt(i int) float64 {
	sc := &s.ts.sc
	for j := range s.scr.mu {
		s.scr.mu[j] = sc.mean[j]
		_, s.scr.inv[j] = sc.scale(j)
	}
	return s.violation(i, s.scr.mu, s.scr.inv)
}

// violation is kkt on the scale (mu, inv).
func (s *sagaLearner) violation(i int, mu, inv []float64) float64 {
	ts := s.ts
	if ts.ring.Len() == 0 {
		return 0
	}
	grad := s.scr.grad
	clear(grad)
	m := s.ms[i]
	b, th := m.b, m.theta
	var gb float64
	for k, sl := range ts.order() {
		r := ts.ring.At(k)
		x := ts.row(sl)
		g := r.w * s.deriv(r.y, b+stdDot(th, x, mu, inv))
		gb += g
		for j, v := range x {
			grad[j] += g * (v - mu[j])
		}
	}
	w := ts.sc.w
	lam, a := m.lambda, s.alpha
	worst := math.Abs(gb / w)
	for j, t := range th {
		gj := grad[j] * inv[j] / w
		if t != 0 {
			worst = max(worst, math.Abs(gj+lam*a*math.Copysign(1, t)+lam*(1-a)*t))
		} else {
			worst = max(worst, math.Abs(gj)-lam*a)
		}
	}
	return worst
}

// Converge works until every member's KKT violation is at most tol or
// maxEpochs epochs are spent, and reports whether tol was reached. It
// first recomputes the scale and sums exactly (resync) and re-anchors the
// grid, then runs sagaEpochs epochs of idle SAGA steps (Len steps per
// member each), then, for members still above tol, epochs of a
// deterministic polish: one proximal Newton step whose quadratic model is
// minimized by cyclic proximal coordinate descent on the window (Friedman,
// Hastie & Tibshirani 2010, §2–3; Lee, Sun & Saunders 2014 for the line
// search). The polish is used only here; the streaming steps are SAGA.
// Afterwards the polished members' gradient tables are rebuilt at their new
// models. For the decay learner (no window) Converge returns false.
func (l *Ladder) Converge(tol float64, maxEpochs int) bool {
	l.grid.respec = true // a ridge grid is re-anchored on the whole window
	return l.lrn.converge(l, tol, maxEpochs)
}

// converge is Ladder.Converge for the SAGA learner; l is the ladder whose
// grid it re-anchors after the resync.
func (s *sagaLearner) converge(l *Ladder, tol float64, maxEpochs int) bool {
	n := s.ts.ring.Len()
	if n == 0 {
		return true
	}
	s.resync()
	l.reanchor(s.lambdaMax(l.alpha0))
	polished, ok := false, false
	for e := 0; ; e++ {
		worst := 0.0
		for i := range s.ms {
			worst = max(worst, s.violation(i, s.ts.mu, s.ts.inv))
		}
		if ok = worst <= tol; ok || e >= maxEpochs {
			break
		}
		if e < sagaEpochs {
			s.run(n)
			continue
		}
		for i, m := range s.ms {
			if s.violation(i, s.ts.mu, s.ts.inv) > tol {
				s.polish(m, tol)
				polished = true
			}
		}
	}
	if polished {
		s.retable()
	}
	return ok
}

// objective returns F(b, θ) at member m's λ on the window (working scale)
// and fills scr.eta with the linear predictors.
func (s *sagaLearner) objective(m *sagaMember, b float64, th []float64) float64 {
	ts := s.ts
	var f float64
	for k, sl := range ts.order() {
		r := ts.ring.At(k)
		eta := b + stdDot(th, ts.row(sl), ts.mu, ts.inv)
		s.scr.eta[k] = eta
		f += r.w * s.loss.Value(r.y, eta)
	}
	return f/ts.sc.w + s.pen.Value(th, m.lambda)
}

// polish is one proximal Newton epoch for member m: the loss is replaced by
// its second-order model at the current (b, θ) (exact for the squared
// loss), the model plus penalty is minimized by cyclic coordinate descent,
// and the step toward that minimizer is halved until F does not increase.
func (s *sagaLearner) polish(m *sagaMember, tol float64) {
	f0 := s.objective(m, m.b, m.theta)
	s.quadratic()
	b0 := m.b
	th0, th1 := s.scr.th0, s.scr.th1
	copy(th0, m.theta)
	s.sweeps(m, tol/10)
	s.activeSolve(m)
	if s.loss.Quadratic() {
		return
	}
	b1 := m.b
	copy(th1, m.theta)
	for t := 1.0; t > 1e-12; t /= 2 {
		m.b = b0 + t*(b1-b0)
		for j := range th1 {
			m.theta[j] = th0[j] + t*(th1[j]-th0[j])
		}
		if f := s.objective(m, m.b, m.theta); f <= f0+1e-15*math.Abs(f0) {
			return
		}
	}
	m.b = b0
	copy(m.theta, th0)
}

// quadratic fills scr.q with w·ℓ” (floored) and scr.rho with w·ℓ' at
// scr.eta: the weights and gradients of the loss's quadratic model.
func (s *sagaLearner) quadratic() {
	ts := s.ts
	floor := 1e-5 * s.curv
	for k := range ts.ring.Len() {
		r := ts.ring.At(k)
		eta := s.scr.eta[k]
		s.scr.q[k] = r.w * max(s.loss.SecondDeriv(r.y, eta), floor)
		s.scr.rho[k] = r.w * s.deriv(r.y, eta)
	}
}

// sweeps runs cyclic proximal coordinate descent on the quadratic model:
// minimize (1/W) Σ [ρ_i Δη_i + ½ q_i Δη_i²] + penalty, keeping
// ρ_i = w_i ℓ'_i + q_i Δη_i current as coordinates move, until a sweep
// finds every coordinate's KKT violation on the model at most tol (tiny
// moves alone do not mean convergence when features are correlated).
func (s *sagaLearner) sweeps(m *sagaMember, tol float64) {
	ts := s.ts
	slots := ts.order()
	n, w := len(slots), ts.sc.w
	q, rho := s.scr.q[:n], s.scr.rho[:n]
	lam, a := m.lambda, s.alpha
	var qsum float64
	for _, v := range q {
		qsum += v
	}
	for range innerSweeps {
		var gb float64
		for _, v := range rho {
			gb += v
		}
		db := -gb / qsum
		m.b += db
		for k := range rho {
			rho[k] += q[k] * db
		}
		worst := math.Abs(gb / w)
		for j, v := range ts.inv {
			if v != 0 {
				worst = max(worst, s.coordinate(m, j, slots, lam, a))
			}
		}
		if worst <= tol {
			return
		}
	}
}

// coordinate minimizes the quadratic model over θ_j and returns the KKT
// violation of θ_j before the move.
func (s *sagaLearner) coordinate(m *sagaMember, j int, slots []int, lam, a float64) float64 {
	ts := s.ts
	d, mu, inv := ts.d, ts.mu[j], ts.inv[j]
	q, rho := s.scr.q, s.scr.rho
	var g, h float64
	for k, sl := range slots {
		x := (ts.x[sl*d+j] - mu) * inv
		g += rho[k] * x
		h += q[k] * x * x
	}
	w := ts.sc.w
	g, h = g/w, h/w
	old := m.theta[j]
	viol := math.Abs(g) - lam*a
	if old != 0 {
		viol = math.Abs(g + lam*a*math.Copysign(1, old) + lam*(1-a)*old)
	}
	z := h*old - g
	nw := (max(z-lam*a, 0) + min(z+lam*a, 0)) / (h + lam*(1-a))
	dj := nw - old
	if dj == 0 {
		return viol
	}
	m.theta[j] = nw
	for k, sl := range slots {
		rho[k] += q[k] * ((ts.x[sl*d+j] - mu) * inv) * dj
	}
	return viol
}

// activeSolve finishes the coordinate descent of polish: on the active set
// S = {j: θ_j ≠ 0} with the signs s held fixed, the minimizer of the
// quadratic model plus penalty solves the linear system
// (ZᵀQZ/W + λ(1−α)·I_S)Δ = −Zᵀρ/W − (0, λα·s + λ(1−α)θ_S), Z = [1, X̃_S]
// (gonum/mat Cholesky). It is accepted when every sign survives; then it is
// the model's exact minimizer on S, which coordinate descent approaches
// only slowly when features are strongly correlated. Otherwise, or when
// the system is singular (|S| ≥ n), nothing changes.
func (s *sagaLearner) activeSolve(m *sagaMember) {
	ts := s.ts
	var act []int
	for j, t := range m.theta {
		if t != 0 && ts.inv[j] != 0 {
			act = append(act, j)
		}
	}
	k := len(act) + 1
	slots := ts.order()
	if k > len(slots) {
		return
	}
	w, lam, a := ts.sc.w, m.lambda, s.alpha
	A := mat.NewSymDense(k, nil)
	rhs := mat.NewVecDense(k, nil)
	z := make([]float64, k)
	for r, sl := range slots {
		x := ts.row(sl)
		z[0] = 1
		for c, j := range act {
			z[c+1] = (x[j] - ts.mu[j]) * ts.inv[j]
		}
		q, rho := s.scr.q[r]/w, s.scr.rho[r]/w
		for u := range k {
			rhs.SetVec(u, rhs.AtVec(u)-z[u]*rho)
			for v := u; v < k; v++ {
				A.SetSym(u, v, A.At(u, v)+q*z[u]*z[v])
			}
		}
	}
	for c, j := range act {
		t := m.theta[j]
		A.SetSym(c+1, c+1, A.At(c+1, c+1)+lam*(1-a))
		rhs.SetVec(c+1, rhs.AtVec(c+1)-lam*a*math.Copysign(1, t)-lam*(1-a)*t)
	}
	var ch mat.Cholesky
	if !ch.Factorize(A) {
		return
	}
	var delta mat.VecDense
	if ch.SolveVecTo(&delta, rhs) != nil {
		return
	}
	for c, j := range act {
		if nw := m.theta[j] + delta.AtVec(c+1); nw == 0 || math.Signbit(nw) != math.Signbit(m.theta[j]) || math.IsNaN(nw) {
			return
		}
	}
	m.b += delta.AtVec(0)
	for c, j := range act {
		m.theta[j] += delta.AtVec(c + 1)
	}
}
