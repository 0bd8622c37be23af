package online

import "math"

// FTRL-Proximal constants (McMahan et al. 2013, Algorithm 1): per-coordinate
// learning rate ftrlAlpha/(ftrlBeta + √n_j). On standardized features the
// gradients are O(1), so one rate serves every stream (value chosen by the
// tests in decay_test.go: support recovery and sign-flip adaptation).
const (
	ftrlAlpha = 0.5
	ftrlBeta  = 1.0
)

// decayMember is one λ of a decay ladder: FTRL-Proximal state per
// coordinate (z_j, n_j and √n_j) and for the unpenalized intercept.
type decayMember struct {
	lambda    float64
	b         float64
	zb, nb    float64
	theta     []float64
	z, n, sqn []float64
}

var _ member = (*decayMember)(nil)

func (m *decayMember) params() (float64, []float64) { return m.b, m.theta }
func (m *decayMember) setLambda(lambda float64)     { m.lambda = lambda }

// weight returns θ_j from (z_j, n_j) in closed form with L1 l1 and L2 l2:
// 0 if |z| ≤ l1, else −(z − sign(z)·l1)/((β + √n)/α + l2).
func (m *decayMember) weight(j int, l1, l2 float64) float64 {
	z := m.z[j]
	if math.Abs(z) <= l1 {
		return 0
	}
	return -(z - math.Copysign(l1, z)) / ((ftrlBeta+m.sqn[j])/ftrlAlpha + l2)
}

// decayLearner is the no-buffer learner: FTRL-Proximal with per-coordinate
// learning rates (McMahan et al. 2013, KDD), L1 and L2 as the penalty
// λ(α‖θ‖₁ + (1−α)/2‖θ‖²) scaled by the decayed weight N = Σ ρ^age·w (so
// that FTRL's sum of losses matches the mean loss of F), and forgetting by
// multiplying all accumulated state by ρ = 2^(−1/half-life) per record.
//
// Features are standardized with an exponentially weighted running mean
// and variance of the values present. A coordinate whose standardized value
// is 0 — in particular a missing value, imputed with the running mean — is
// not touched: its gradient is 0, and its decay and penalty are applied
// lazily when it is next touched (Langford, Li & Zhang 2009), so a record
// costs O(present features). Wide sparse streams should therefore send
// absent channels as missing, not as 0.
type decayLearner struct {
	alpha      float64
	rho, lnRho float64
	sqrtRho    float64
	loss       Loss
	kind       lossKind // the loss, devirtualized for deriv
	clock      int64
	count      float64 // Σ ρ^age
	wsum       float64 // N = Σ ρ^age·w
	since      int     // records since the last re-anchor

	last         []int64   // clock of the last touch of each feature
	fw, mean, m2 []float64 // EW weight, mean, Σ w (x − μ)² of present values
	ymean, cxy   []float64 // EW mean of y and co-moment with x, same records
	sd, inv      []float64
	xt           []float64 // standardized values of the touched features
	idx          []int     // touched features
	ms           []*decayMember
}

func newDecay(o *Options, d int) *decayLearner {
	mk := func() []float64 { return make([]float64, d) }
	rho := math.Exp2(-1 / o.HalfLife)
	l := &decayLearner{
		alpha: o.Penalty.Mix, rho: rho, lnRho: math.Log(rho), sqrtRho: math.Sqrt(rho), loss: o.Loss, kind: kindOf(o.Loss),
		last: make([]int64, d), fw: mk(), mean: mk(), m2: mk(), ymean: mk(), cxy: mk(),
		sd: mk(), inv: mk(), xt: mk(), idx: make([]int, 0, d),
	}
	for range o.Size {
		l.ms = append(l.ms, &decayMember{theta: mk(), z: mk(), n: mk(), sqn: mk()})
	}
	return l
}

var _ learner = (*decayLearner)(nil)

// members returns the members as the ladder holds them.
func (l *decayLearner) members() []member {
	ms := make([]member, len(l.ms))
	for i, m := range l.ms {
		ms[i] = m
	}
	return ms
}

// setLambdas gives member i the λ lambdas[i].
func (l *decayLearner) setLambdas(lambdas []float64) {
	for i, m := range l.ms {
		m.setLambda(lambdas[i])
	}
}

// The decay learner takes NaN as missing (fill nil), learns only in add
// (run does nothing), keeps its scale current in add (rescale reports
// false), discounts instead of evicting (shrink), and has no grid-shift
// warm start and no window to converge on (kkt NaN, converge false).
func (l *decayLearner) fill() []float64                     { return nil }
func (l *decayLearner) run(int)                             {}
func (l *decayLearner) rescale() bool                       { return false }
func (l *decayLearner) shift(int)                           {}
func (l *decayLearner) kkt(int) float64                     { return math.NaN() }
func (l *decayLearner) converge(*Ladder, float64, int) bool { return false }

// shrink is shrinkTo(max(n, 0)); it leaves the scale alone.
func (l *decayLearner) shrink(n int) bool {
	l.shrinkTo(float64(max(n, 0)))
	return false
}

// len returns the decayed record count Σ ρ^age, rounded.
func (l *decayLearner) len() int { return int(math.Round(l.count)) }

// weight returns the decayed weight N = Σ ρ^age·w.
func (l *decayLearner) weight() float64 { return l.wsum }

// scale returns the running scale.
func (l *decayLearner) scale() (mu, sd, inv []float64) { return l.mean, l.sd, l.inv }

// factor returns ρ^k.
func (l *decayLearner) factor(k int64) float64 {
	if k == 1 {
		return l.rho
	}
	return math.Exp(float64(k) * l.lnRho)
}

// add takes one validated record (NaN = missing; no time, as nothing is
// evicted) and reports whether the ladder should re-anchor (every
// refreshEvery records).
func (l *decayLearner) add(x []float64, y, w float64, _ int64) bool {
	l.clock++
	l.count = l.rho*l.count + 1
	l.wsum = l.rho*l.wsum + w
	l.idx = l.idx[:0]
	for j, v := range x {
		if v != v {
			continue
		}
		f := l.decayFeature(j)
		l.scaleFeature(j, v, y, w, f)
		if xt := (v - l.mean[j]) * l.inv[j]; xt != 0 {
			l.xt[len(l.idx)] = xt
			l.idx = append(l.idx, j)
		}
	}
	for _, m := range l.ms {
		l.update(m, y, w)
	}
	l.since++
	if l.since >= refreshEvery {
		l.since = 0
		return true
	}
	return false
}

// decayFeature applies the decay owed by feature j since its last touch to
// every member's state and returns the factor for the scaler.
func (l *decayLearner) decayFeature(j int) float64 {
	k := l.clock - l.last[j]
	l.last[j] = l.clock
	f, sf := l.rho, l.sqrtRho
	if k != 1 {
		f = l.factor(k)
		sf = math.Sqrt(f)
	}
	for _, m := range l.ms {
		m.z[j] *= f
		m.n[j] *= f
		m.sqn[j] *= sf
	}
	return f
}

// scaleFeature adds value v (label y, weight w) to feature j's running
// scale after decaying it by f (weighted Welford with forgetting).
func (l *decayLearner) scaleFeature(j int, v, y, w, f float64) {
	fw := f*l.fw[j] + w
	d := v - l.mean[j]
	l.mean[j] += w / fw * d
	l.ymean[j] += w / fw * (y - l.ymean[j])
	l.m2[j] = f*l.m2[j] + w*d*(v-l.mean[j])
	l.cxy[j] = f*l.cxy[j] + w*d*(y-l.ymean[j])
	l.fw[j] = fw
	sd := math.Sqrt(max(l.m2[j]/fw, 0))
	l.sd[j], l.inv[j] = sd, 0
	if sd >= constAbs && sd > constRel*math.Abs(l.mean[j]) {
		l.inv[j] = 1 / sd
	}
}

// update is one FTRL-Proximal round of member m on the touched features.
func (l *decayLearner) update(m *decayMember, y, w float64) {
	l1 := m.lambda * l.alpha * l.wsum
	l2 := m.lambda * (1 - l.alpha) * l.wsum
	eta := m.b
	for k, j := range l.idx {
		m.theta[j] = m.weight(j, l1, l2)
		eta += m.theta[j] * l.xt[k]
	}
	g := w * l.deriv(y, eta)
	if math.IsNaN(g) || math.IsInf(g, 0) {
		return // unreachable with validated input; keeps NaN out
	}
	m.zb, m.nb = l.rho*m.zb, l.rho*m.nb
	sq := math.Sqrt(m.nb)
	nb := m.nb + g*g
	snb := math.Sqrt(nb)
	m.zb += g - (snb-sq)/ftrlAlpha*m.b
	m.nb = nb
	m.b = -m.zb / ((ftrlBeta + snb) / ftrlAlpha)
	for k, j := range l.idx {
		gj := g * l.xt[k]
		nj := m.n[j] + gj*gj
		snj := math.Sqrt(nj)
		m.z[j] += gj - (snj-m.sqn[j])/ftrlAlpha*m.theta[j]
		m.n[j], m.sqn[j] = nj, snj
		m.theta[j] = m.weight(j, l1, l2)
	}
}

// deriv returns ℓ'(y, η), the built-in losses inline (lossKind).
func (l *decayLearner) deriv(y, eta float64) float64 {
	switch l.kind {
	case lossSquared:
		return eta - y
	case lossLogistic:
		return Sigmoid(eta) - y
	}
	return l.loss.Deriv(y, eta)
}

// lambdaMax returns max_j |Σ w x̃_j (y − ȳ)| / (W α) on the decayed
// statistics of each feature's present values.
func (l *decayLearner) lambdaMax(alpha float64) float64 {
	var m float64
	for j, c := range l.cxy {
		if l.fw[j] > 0 {
			m = max(m, math.Abs(c)*l.inv[j]/l.fw[j])
		}
	}
	return m / alpha
}

// shrinkTo discounts all accumulated state by min(1, n/count), so the
// learner weighs at most n records.
func (l *decayLearner) shrinkTo(n float64) {
	if l.count <= n || l.count == 0 {
		return
	}
	f := n / l.count
	l.count *= f
	l.wsum *= f
	for j := range l.fw {
		l.fw[j] *= f
		l.m2[j] *= f
		l.cxy[j] *= f
	}
	sf := math.Sqrt(f)
	for _, m := range l.ms {
		m.zb *= f
		m.nb *= f
		for j := range m.z {
			m.z[j] *= f
			m.n[j] *= f
			m.sqn[j] *= sf
		}
	}
}
