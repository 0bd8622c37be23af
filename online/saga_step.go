package online

// The steps of the SAGA learner (saga.go): run draws the records and steps
// every member at each, through step (K = 1, single-member kernels) or
// stepAll (one batched kernel call for all members).

// run takes steps proximal SAGA steps per member, all at the same random
// records. The index of the next step is drawn before the current step, so
// each member's update also returns its dot product with the next record:
// one pass per member-step. With K = 1 the kernel standardizes the next
// record as it goes (sagaDotRaw); a larger ladder stages it once into xn
// for all members (sagaAll). After add, the first step is at the record
// add drew, and it also folds in the pending admission.
func (s *sagaLearner) run(steps int) {
	ts := s.ts
	n := ts.ring.Len()
	if n == 0 || steps <= 0 {
		s.settle()
		return
	}
	if s.gamma != s.cGamma || ts.sc.w != s.cW {
		s.c, s.cGamma, s.cW = s.gamma/ts.sc.w, s.gamma, ts.sc.w
	}
	c := s.c
	i := s.first
	if !s.pending && !s.primed {
		if i < 0 {
			i = s.rng.IntN(n)
		}
		s.stage(ts.row(ts.ring.Slot(i)))
		for _, m := range s.ms {
			m.eta = s.eta(m)
		}
	}
	s.first, s.primed = -1, false
	for k := range steps {
		slot, r := ts.ring.Slot(i), ts.ring.At(i)
		x := ts.row(slot)
		if s.pending && i == n-1 {
			x = s.pend // the new record's row is not stored yet
		}
		next := k+1 < steps
		if next {
			i = s.rng.IntN(n)
			s.next = ts.row(ts.ring.Slot(i))
			if s.pending && i == n-1 {
				s.next = s.pend
			}
			if !s.raw {
				stdRow(s.xn, s.next, ts.mu, ts.inv)
				s.next = s.xn
			}
		}
		if s.raw {
			s.step(s.ms[0], slot, x, r.y, r.w, float64(n), c, next) // stores a pending row itself
		} else {
			s.stepAll(slot, x, r.y, r.w, float64(n), c, next)
			if s.pending {
				copy(ts.row(s.pslot), s.pend)
			}
		}
		s.pending = false
	}
}

// step is one proximal SAGA step of member m at the record in slot, whose
// linear predictor is m.eta: with δ = g_new − g_old, the gradient estimate
// (δ/w̄)(1, x̃) + (G, S̃)/W (w̄ = W/n, S̃ the standardized S) and c = γ/W,
// the intercept moves by −c(nδ + G) and each θ_j to
// prox(θ_j − c·v_j(nδ·x_j + S_j − (nδ + G)μ_j)), v_j = 1/s_j; then S += δx
// and G += δ (kernel sagaGo). With next set, m.eta becomes the predictor
// on the next record s.next (raw: standardized by the kernel). It serves
// K = 1; stepAll steps a larger ladder with one kernel call.
func (s *sagaLearner) step(m *sagaMember, slot int, x []float64, y, w, n, c float64, next bool) {
	ts := s.ts
	e, h, delta := s.scalars(m, slot, y, w, n, c)
	switch {
	case s.pending:
		// The arrival kernels also store the new record's row over the old.
		row := ts.row(s.pslot)
		old := s.pend
		if s.pfull {
			old = row
		}
		if next {
			m.eta = m.b + sagaArriveRaw(m.theta, m.s, x, ts.mu, ts.inv, s.pend, old, s.next, row, e, h, c, m.thr, m.shrink, delta, m.gnew, -m.gold)
		} else {
			sagaArrive0(m.theta, m.s, x, ts.mu, ts.inv, s.pend, old, row, e, h, c, m.thr, m.shrink, delta, m.gnew, -m.gold)
		}
	case next:
		m.eta = m.b + sagaDotRaw(m.theta, m.s, x, ts.mu, ts.inv, s.next, e, h, c, m.thr, m.shrink, delta)
	default:
		saga(m.theta, m.s, x, ts.mu, ts.inv, e, h, c, m.thr, m.shrink, delta)
	}
}

// stepAll is step for every member at once: the scalar parts member by
// member, then one call of the batched kernel (sagaAll) for the vectors.
// The arithmetic is step's, member for member.
func (s *sagaLearner) stepAll(slot int, x []float64, y, w, n, c float64, next bool) {
	ts := s.ts
	prm := s.prm[:len(s.ms)]
	g := s.ms[0].g[slot*s.k : slot*s.k+len(s.ms)] // the record's gradients, one per member
	for k, m := range s.ms {
		// scalars, inline: a call per member is a tenth of a step at d = 16.
		gn := s.grad(y, w, m.eta)
		if gn-gn != 0 {
			gn = g[k] // NaN or ±Inf: unreachable with validated input
		}
		delta := gn - g[k]
		g[k] = gn
		gsum := m.gsum
		if s.pending {
			gsum += m.gnew - m.gold
		}
		e := n * delta
		h := e + gsum
		m.b -= c * h
		m.gsum = gsum + delta
		// Field by field: a struct literal is built on the stack and
		// copied in 16-byte moves, which stall on store forwarding.
		p := &prm[k]
		p.e, p.h, p.t, p.r, p.delta, p.a, p.b = e, h, m.thr, m.shrink, delta, m.gnew, -m.gold
	}
	var xa, xo, xn []float64
	if s.pending {
		xa, xo = s.pend, s.pend
		if s.pfull {
			xo = ts.row(s.pslot)
		}
	}
	if next {
		xn = s.next
	}
	sagaAll(s.theta, s.sums, x, ts.mu, ts.inv, xa, xo, xn, s.prm, c)
	if next {
		for k, m := range s.ms {
			m.eta = m.b + s.prm[k].dot
		}
	}
}

// scalars is the scalar part of a step of member m at the record in slot
// (see step): it returns e = nδ, h = nδ + G and δ, moves the intercept,
// folds a pending admission into G and stores the record's new gradient.
func (s *sagaLearner) scalars(m *sagaMember, slot int, y, w, n, c float64) (e, h, delta float64) {
	old := &m.g[slot*s.k]
	gn := s.grad(y, w, m.eta)
	if gn-gn != 0 {
		gn = *old // NaN or ±Inf: unreachable with validated input; keeps NaN out of θ
	}
	delta = gn - *old
	*old = gn
	gsum := m.gsum
	if s.pending {
		gsum += m.gnew - m.gold
	}
	e = n * delta
	h = e + gsum
	m.b -= c * h
	m.gsum = gsum + delta
	return e, h, delta
}

// grad returns w·ℓ'(y, η), the squared loss inline.
func (s *sagaLearner) grad(y, w, eta float64) float64 {
	if s.kind == lossSquared {
		return w * (eta - y)
	}
	return w * s.deriv(y, eta)
}
