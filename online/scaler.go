package online

import "math"

// Constant-feature floor: a feature whose population standard deviation s
// satisfies s ≤ constRel·|μ| or s < constAbs is treated as constant. Its
// inverse scale is 0, so its standardized value is 0 for every record and
// its coefficient is held at 0; nothing is ever divided by s. constRel sits
// well above the relative rounding error of a running mean (about 1e-16)
// and far below any real sensor resolution (common practice, no single
// source).
const (
	constRel = 1e-10
	constAbs = 1e-150
)

// scaler is the exact running scale of a set of weighted records: the total
// weight W = Σw, the weighted mean μ_j and the sum of squared deviations
// m2_j = Σ w (x_j − μ_j)² of every feature, and the raw sums Σ w y and
// Σ w y x_j that anchor λ_max. Records are added and removed in O(d) with
// the weighted Welford update (Welford 1962; West 1979) and its exact
// reverse (Chan, Golub & LeVeque 1983); recompute rebuilds everything with
// two passes to cap the drift of rounding error.
type scaler struct {
	w    float64   // Σ w
	wy   float64   // Σ w y
	mean []float64 // μ
	m2   []float64 // Σ w (x − μ)²
	sxy  []float64 // Σ w y x
}

func newScaler(d int) scaler {
	return scaler{mean: make([]float64, d), m2: make([]float64, d), sxy: make([]float64, d)}
}

// add includes x with weight w > 0 and label y.
func (s *scaler) add(x []float64, w, y float64) {
	nw := s.w + w
	welford(s.mean, s.m2, s.sxy, x, w/nw, w, w*y)
	s.w = nw
	s.wy += w * y
}

// remove takes out a record added before; removing the last one must go
// through reset instead (the weights would cancel to rounding noise).
func (s *scaler) remove(x []float64, w, y float64) {
	nw := s.w - w
	if !(nw > 0) {
		s.reset()
		return
	}
	welford(s.mean, s.m2, s.sxy, x, -w/nw, -w, -w*y)
	s.w = nw
	s.wy -= w * y
}

// swap removes a record added before (xo, wo, yo) and adds x with weight
// w > 0 and label y, in one pass over the features: the same arithmetic, in
// the same order, as remove followed by add.
func (s *scaler) swap(xo []float64, wo, yo float64, x []float64, w, y float64) {
	nw := s.w - wo
	if !(nw > 0) {
		s.reset()
		s.add(x, w, y)
		return
	}
	tw := nw + w
	welford2(s.mean, s.m2, s.sxy, xo, x, -wo/nw, -wo, -wo*yo, w/tw, w, w*y)
	s.w = tw
	s.wy = (s.wy - wo*yo) + w*y
}

// reset empties the scaler.
func (s *scaler) reset() {
	s.w, s.wy = 0, 0
	clear(s.mean)
	clear(s.m2)
	clear(s.sxy)
}

// scale returns the population standard deviation of feature j (ddof 0)
// and its inverse, 0 for a constant feature.
func (s *scaler) scale(j int) (sd, inv float64) {
	if !(s.w > 0) {
		return 0, 0
	}
	sd = math.Sqrt(max(s.m2[j]/s.w, 0))
	if sd < constAbs || sd <= constRel*math.Abs(s.mean[j]) {
		return sd, 0
	}
	return sd, 1 / sd
}

// recompute rebuilds the scaler from the records (row(i), y(i), w(i)),
// i < n, with two passes: the means first, then the squared deviations
// about them, which is exact up to one rounding per term.
func (s *scaler) recompute(n int, row func(i int) []float64, yw func(i int) (y, w float64)) {
	s.reset()
	for i := range n {
		y, w := yw(i)
		axpy(w, row(i), s.mean)
		s.w += w
		s.wy += w * y
	}
	if !(s.w > 0) {
		s.reset()
		return
	}
	for j := range s.mean {
		s.mean[j] /= s.w
	}
	for i := range n {
		y, w := yw(i)
		welford(s.mean, s.m2, s.sxy, row(i), 0, w, w*y) // f = 0: m2 += w (x − μ)², sxy += w y x
	}
}

// lambdaMax returns max_j |Σ w x̃_j (y − ȳ_w)| / (W α) = max_j
// |Σ w y x_j − μ_j Σ w y| / (s_j W α) on the current sums (Friedman, Hastie
// & Tibshirani 2010, §2.5), with inv the inverse scales to use.
func (s *scaler) lambdaMax(inv []float64, alpha float64) float64 {
	if !(s.w > 0) {
		return 0
	}
	var m float64
	for j, v := range inv {
		m = max(m, math.Abs(s.sxy[j]-s.mean[j]*s.wy)*v)
	}
	return m / (s.w * alpha)
}
