package online

import (
	"math"
	"math/rand/v2"
)

// sagaMember is one λ of a windowed proximal SAGA ladder. It keeps one
// scalar gradient g_i = w_i·ℓ'(y_i, η_i) per window record (by ring slot)
// and their sums in raw units, S = Σ g_i x_i and G = Σ g_i, so that a
// moving mean or scale leaves no stale state: the standardized average
// gradient is (S − μG)/(s·W) exactly.
type sagaMember struct {
	lambda float64
	b      float64   // intercept
	theta  []float64 // standardized coefficients θ
	s      []float64 // S = Σ g_i x_i (raw units)
	gsum   float64   // G = Σ g_i
	g      []float64 // g_i of the record in slot at g[slot·K]: the learner's slot-major table from offset k
	thr    float64   // γλα, the soft threshold of the prox
	shrink float64   // 1/(1 + γλ(1−α)), the ridge part of the prox
	eta    float64   // predictor on the record of the coming step (run)
	gnew   float64   // pending admission: gradient of the new record
	gold   float64   // pending admission: gradient of the record it replaces
}

var _ member = (*sagaMember)(nil)

func (m *sagaMember) params() (float64, []float64) { return m.b, m.theta }
func (m *sagaMember) setLambda(lambda float64)     { m.lambda = lambda }

// setStep caches the prox constants for step γ and mix α.
func (m *sagaMember) setStep(gamma, alpha float64) {
	m.thr = gamma * m.lambda * alpha
	m.shrink = 1 / (1 + gamma*m.lambda*(1-alpha))
}

// copyFrom makes m a warm copy of o (state, not λ).
func (m *sagaMember) copyFrom(o *sagaMember, slots []int, k int) {
	m.b, m.gsum = o.b, o.gsum
	copy(m.theta, o.theta)
	copy(m.s, o.s)
	for _, s := range slots {
		m.g[s*k] = o.g[s*k]
	}
}

// sagaLearner trains every member of a ladder on one shared trainset with
// proximal SAGA (Defazio, Bach & Lacoste-Julien 2014) on
// F(b, θ) = (1/W) Σ w_i ℓ(y_i, b + x̃_iᵀθ) + λ(α‖θ‖₁ + (1−α)/2‖θ‖²).
// All members take their steps at the same random record, drawn from one
// PCG stream, so the record's row is read once per step for all of them.
type sagaLearner struct {
	ts    *trainset
	ms    []*sagaMember
	loss  Loss
	curv  float64
	alpha float64
	span  int64 // milliseconds; 0 = none
	rng   *rand.Rand
	src   *rand.PCG // rng's source, kept so that its state can be saved
	gamma float64
	kind  lossKind  // the loss, devirtualized for deriv
	k     int       // K, the stride of the gradient table
	raw   bool      // K = 1: the kernels standardize the next record on the fly
	xt    []float64 // the staged record, standardized
	xn    []float64 // the record of the next step, standardized (K > 1)
	next  []float64 // the record of the next step as the kernels take it: xn, or the raw row
	xa    []float64 // the arriving record, standardized (K > 1)

	// The members' θ and S as K×d row-major matrices (member k's slices
	// are its rows), so that one kernel call serves every member.
	theta, sums []float64
	prm         []stepParam // per member scalars of a batched step (stepAll)
	dd          []float64   // per member θ·x̃ of the arrival and of the first step

	// Memos of the step's divisions: γ is recomputed only when an input
	// of the smoothness bound moved, and c = γ/W only when γ or W did.
	gkey      gammaKey
	c, cGamma float64
	cW        float64

	// An admission pending in the members' sums (see add).
	pending, pfull bool
	pslot          int
	pend           []float64 // the new record's features (the ladder's buffer)
	first          int       // drawn index of the first step, −1 if none
	primed         bool      // m.eta holds the predictor at s.first

	// The finishing pass (polish.go): the penalty (its Mix is alpha) for
	// the objective, and the buffers of KKT and Converge.
	pen *Penalty
	scr scratch
}

func newSAGA(o *Options, d int) *sagaLearner {
	s := &sagaLearner{
		ts: newTrainset(d, o.Window), loss: o.Loss, kind: kindOf(o.Loss), curv: o.Loss.Curvature(),
		alpha: o.Penalty.Mix, pen: o.Penalty, span: o.Span.Milliseconds(), scr: newScratch(d, o.Window),
		src: rand.NewPCG(o.Seed, seedStream), xt: make([]float64, d), xn: make([]float64, d), xa: make([]float64, d), first: -1,
	}
	s.rng = rand.New(s.src)
	// One gradient table for all members, slot-major, so a step reads the
	// K gradients of its record from one or two cache lines.
	s.k = o.Size
	s.raw = o.Size == 1
	table := make([]float64, o.Window*o.Size)
	s.theta, s.sums = make([]float64, o.Size*d), make([]float64, o.Size*d)
	s.prm, s.dd = make([]stepParam, o.Size), make([]float64, 2*o.Size)
	for k := range o.Size {
		row := func(a []float64) []float64 { return a[k*d : (k+1)*d : (k+1)*d] }
		s.ms = append(s.ms, &sagaMember{theta: row(s.theta), s: row(s.sums), g: table[k:]})
	}
	s.setGamma()
	return s
}

var _ learner = (*sagaLearner)(nil)

// members returns the members as the ladder holds them.
func (s *sagaLearner) members() []member {
	ms := make([]member, len(s.ms))
	for i, m := range s.ms {
		ms[i] = m
	}
	return ms
}

// setLambdas gives member i the λ lambdas[i] and the prox constants of the
// current step.
func (s *sagaLearner) setLambdas(lambdas []float64) {
	for i, m := range s.ms {
		m.setLambda(lambdas[i])
		m.setStep(s.gamma, s.alpha)
	}
}

// fill returns the window means, which replace missing values.
func (s *sagaLearner) fill() []float64 { return s.ts.sc.mean }

// rescale refreshes the working scale if records arrived since the last
// refresh.
func (s *sagaLearner) rescale() bool {
	if s.ts.since <= 0 {
		return false
	}
	s.refresh()
	return true
}

// shrink evicts all but the newest n records; a non-empty window was
// resynced.
func (s *sagaLearner) shrink(n int) bool {
	s.shrinkTo(n)
	return s.ts.ring.Len() > 0
}

// len returns the number of records in the window.
func (s *sagaLearner) len() int { return s.ts.ring.Len() }

// weight returns the window's total weight W.
func (s *sagaLearner) weight() float64 { return s.ts.sc.w }

// scale returns the working scale.
func (s *sagaLearner) scale() (mu, sd, inv []float64) { return s.ts.mu, s.ts.sd, s.ts.inv }

// seedStream is the fixed second word of the PCG seed.
const seedStream = 0x6c61726961742d31

// deriv returns ℓ'(y, η), the built-in losses inline (lossKind).
func (s *sagaLearner) deriv(y, eta float64) float64 {
	switch s.kind {
	case lossSquared:
		return eta - y
	case lossLogistic:
		return Sigmoid(eta) - y
	}
	return s.loss.Deriv(y, eta)
}

// gammaKey is what the step γ depends on (trainset.lipschitz).
type gammaKey struct {
	maxW, bound, w float64
	n              int
}

// setGamma recomputes the step γ = 1/(3L) and the members' prox constants
// when an input of L changed (three divisions saved per record otherwise).
func (s *sagaLearner) setGamma() {
	ts := s.ts
	key := gammaKey{ts.maxW, ts.bound(), ts.sc.w, ts.ring.Len()}
	if key == s.gkey && s.gamma != 0 {
		return
	}
	s.gkey = key
	g := 1 / (3 * ts.lipschitz(s.curv))
	if g == s.gamma {
		return
	}
	s.gamma = g
	for _, m := range s.ms {
		m.setStep(g, s.alpha)
	}
}

// add admits a validated record: it evicts what the record pushes out
// (span, then count) and appends it. It draws the first step's record
// now, so that one pass over the features (kernel stdPrep, or stdPrep1 for
// K = 1) standardizes both records and yields the norms of the smoothness
// bound, and one more (dot2All) gives each member the two dot products it
// needs: the new record's gradient g_a at the current model, and the first
// step's predictor. The scaler takes the swap of records in one pass
// (scaler.swap). The update of the sums, S += g_a·x_new − g_o·x_old and
// G += g_a − g_o (g_o of the record the new one replaces), stays pending:
// the first step folds it into its pass (kernels sagaArrive0,
// sagaArriveRaw, sagaAll), or settle applies it. Last it runs the
// scheduled maintenance and reports whether the working scale changed.
func (s *sagaLearner) add(x []float64, y, w float64, t int64) bool {
	ts := s.ts
	if s.span > 0 && t != 0 {
		// A record without a time (t = 0) leaves by count only: one timed
		// record must not evict every untimed one before it.
		for m, ok := ts.ring.Oldest(); ok && m.t != 0 && m.t < t-s.span; m, ok = ts.ring.Oldest() {
			s.evict()
		}
	}
	full := ts.ring.Len() == ts.ring.Cap()
	n := ts.ring.Len()
	if !full {
		n++
	}
	s.first = s.rng.IntN(n) // logical index after admission
	row := x
	if s.first < n-1 {
		pre := s.first
		if full {
			pre++
		}
		row = ts.row(ts.ring.Slot(pre))
	}
	var sqRef, sqWork float64
	if s.raw {
		sqRef, sqWork, s.dd[0], s.dd[1] = stdPrep1(s.theta, x, row, ts.mu, ts.inv, ts.refMu, ts.refInv)
	} else {
		sqRef, sqWork = stdPrep(s.xa, s.xt, x, row, ts.mu, ts.inv, ts.refMu, ts.refInv)
		dot2All(s.theta, s.xa, s.xt, s.dd)
	}
	slot := -1
	if full {
		slot = ts.ring.Slot(0)
	}
	for k, m := range s.ms {
		da, dt := s.dd[2*k], s.dd[2*k+1]
		m.gnew, m.gold = s.finite(s.grad(y, w, m.b+da)), 0
		if full {
			m.gold = m.g[slot*s.k]
		}
		m.eta = m.b + dt
	}
	if full {
		ts.replace(x, y, w, t, sqRef, sqWork)
	} else {
		slot = ts.push(x, y, w, t, sqRef, sqWork)
	}
	for _, m := range s.ms {
		m.g[slot*s.k] = m.gnew
	}
	s.pending, s.pslot, s.pfull, s.pend = true, slot, full, x
	s.primed = true
	return s.maintain()
}

// settle applies a pending admission to the members' sums and stores the
// new record's row.
func (s *sagaLearner) settle() {
	if !s.pending {
		return
	}
	old := s.ts.row(s.pslot)
	for _, m := range s.ms {
		if s.pfull {
			axpy2(m.gnew, s.pend, -m.gold, old, m.s)
		} else {
			axpy(m.gnew, s.pend, m.s)
		}
		m.gsum += m.gnew - m.gold
	}
	copy(old, s.pend)
	s.pending = false
}

// finite returns g, or 0 if g is NaN or infinite (unreachable with
// validated input and γ ≤ 1/(3L); it keeps NaN out of the sums).
func (s *sagaLearner) finite(g float64) float64 {
	if math.IsNaN(g) || math.IsInf(g, 0) {
		return 0
	}
	return g
}

// stage standardizes record x once into s.xt for all the members.
func (s *sagaLearner) stage(x []float64) { stdRow(s.xt, x, s.ts.mu, s.ts.inv) }

// eta returns member m's linear predictor on the staged record.
func (s *sagaLearner) eta(m *sagaMember) float64 { return m.b + dot(m.theta, s.xt) }

// evict removes the oldest record from every member's sums and the window.
func (s *sagaLearner) evict() {
	ts := s.ts
	slot := ts.ring.Slot(0)
	x := ts.row(slot)
	last := ts.ring.Len() == 1
	for _, m := range s.ms {
		if g := m.g[slot*s.k]; g != 0 {
			axpy(-g, x, m.s)
			m.gsum -= g
		}
		m.g[slot*s.k] = 0
		if last {
			clear(m.s)
			m.gsum = 0
		}
	}
	ts.pop()
}

// maintain runs the scheduled resync or working-scale refresh and reports
// whether the scale changed (so the ladder re-anchors).
func (s *sagaLearner) maintain() bool {
	ts := s.ts
	switch {
	case ts.resyncDue():
		s.settle()
		s.resync()
	case ts.since >= refreshEvery:
		s.settle()
		s.refresh()
		if ts.bound() > 4*ts.boundAtResync && 8*ts.arrivals >= ts.resyncLen {
			s.resync()
		}
	default:
		s.setGamma()
		return false
	}
	return true
}

// refresh updates the working scale, zeroes the coefficients of constant
// features and recomputes the step.
func (s *sagaLearner) refresh() {
	s.primed = false
	s.ts.refresh()
	for j, v := range s.ts.inv {
		if v == 0 {
			for _, m := range s.ms {
				m.theta[j] = 0
			}
		}
	}
	s.setGamma()
}

// resync recomputes the scaler and every member's sums S and G from the
// stored records and gradients, capping the drift of rounding error.
// O(n·d·K), run once per resyncEvery window lengths of arrivals (see
// trainset.resyncDue), so O(d·K/4) per record; S takes one kernel call
// (sumRows) per run of consecutive slots.
func (s *sagaLearner) resync() {
	ts := s.ts
	ts.recompute()
	slots := ts.slots[:ts.ring.Len()]
	clear(s.sums)
	for _, m := range s.ms {
		m.gsum = 0
		for _, sl := range slots {
			if g := m.g[sl*s.k]; g != 0 {
				m.gsum += g
			}
		}
	}
	// S of every member in one kernel call per run of consecutive slots
	// (a ring has at most two), in window order: the FMAs of an axpy per
	// record and member, in the same order.
	table, d, k := s.ms[0].g, ts.d, s.k
	for i := 0; i < len(slots); {
		j := i + 1
		for j < len(slots) && slots[j] == slots[j-1]+1 {
			j++
		}
		lo, hi := slots[i], slots[j-1]+1
		sumRows(s.sums, ts.x[lo*d:hi*d], table[lo*k:hi*k], d, k)
		i = j
	}
	s.refresh()
}

// shift re-seats the members after the λ grid moved by k grid steps
// (k > 0: λ_max fell, so new member i is nearest to old member i+k): each
// member becomes a warm copy of its nearest old neighbour.
func (s *sagaLearner) shift(k int) {
	K := len(s.ms)
	slots := s.ts.order()
	if k > 0 {
		for i := 0; i < K; i++ {
			if j := min(i+k, K-1); j != i {
				s.ms[i].copyFrom(s.ms[j], slots, s.k)
			}
		}
		return
	}
	for i := K - 1; i >= 0; i-- {
		if j := max(i+k, 0); j != i {
			s.ms[i].copyFrom(s.ms[j], slots, s.k)
		}
	}
}

// shrinkTo evicts the oldest records until at most n remain.
func (s *sagaLearner) shrinkTo(n int) {
	if n < 0 {
		n = 0
	}
	if s.ts.ring.Len() <= n {
		return
	}
	for s.ts.ring.Len() > n {
		s.evict()
	}
	if s.ts.ring.Len() > 0 {
		s.resync()
	}
}

// lambdaMax returns λ_max on the working scale with anchor mix alpha.
func (s *sagaLearner) lambdaMax(alpha float64) float64 {
	return s.ts.sc.lambdaMax(s.ts.inv, alpha)
}

// retable recomputes every member's gradient table at its current model
// and the sums S and G from it, so that the next SAGA steps start from the
// exact gradient (used after Converge moved the models by polishing).
func (s *sagaLearner) retable() {
	ts := s.ts
	slots := ts.order()
	for _, m := range s.ms {
		clear(m.s)
		m.gsum = 0
		for i, sl := range slots {
			r := ts.ring.At(i)
			x := ts.row(sl)
			g := r.w * s.deriv(r.y, m.b+stdDot(m.theta, x, ts.mu, ts.inv))
			m.g[sl*s.k] = g
			axpy(g, x, m.s)
			m.gsum += g
		}
	}
}
