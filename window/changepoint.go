package window

import "math"

// Rise is the estimate of one rise of the mean in a sequence of values: the
// split into an older part (n0 values) and a newer part (n1 values) that
// EstimateRise found.
type Rise struct {
	// After is n1, the number of newest values after the estimated change
	// point; 0 when no split has a newer mean above the older one.
	After int
	// Stat is the statistic at the split, n0·n1/n·(μ̂1 − μ̂0)², over the
	// finite values (0 when After is 0).
	Stat float64
	// Before and Mean are μ̂0 and μ̂1, the means of the finite values
	// before and after the split.
	Before, Mean float64
}

// EstimateRise estimates where the mean of the ring's values (oldest
// first) rose: of every split into an older part of n0 values and a newer
// part of n1 values (both non-empty) whose newer mean is higher, it picks
// the one that maximizes
//
//	T = n0·n1/n · (μ̂1 − μ̂0)²,
//
// the log-likelihood ratio (times 2σ²) of one change of the mean against
// none for independent normal values of a common variance, whose maximizer
// is the maximum-likelihood estimate of the change point (Hinkley 1970,
// "Inference about the change-point in a sequence of random variables",
// Biometrika 57; the CUSUM form of Page 1954). Ties go to the newest split;
// a difference of means within 1e-12 of their magnitude is rounding, not a
// rise.
// It is O(n), does not allocate, and skips NaN and infinite values (they
// still count as positions in After). A ring with fewer than two finite
// values gives the zero Rise.
func EstimateRise(r *Ring[float64]) Rise {
	var tot float64
	cnt := 0
	for i := range r.n {
		if v := r.At(i); isFinite(v) {
			tot += v
			cnt++
		}
	}
	var best Rise
	if cnt < 2 {
		return best
	}
	n := float64(cnt)
	var s0 float64
	c0 := 0
	for i := range r.n - 1 {
		if v := r.At(i); isFinite(v) {
			s0 += v
			c0++
		}
		if c0 == 0 || c0 == cnt {
			continue
		}
		n0, n1 := float64(c0), n-float64(c0)
		m0, m1 := s0/n0, (tot-s0)/n1
		if !(m1-m0 > 1e-12*(math.Abs(m0)+math.Abs(m1))) {
			continue // no rise, or one within rounding (a constant sequence)
		}
		if t := n0 * n1 / n * (m1 - m0) * (m1 - m0); t >= best.Stat {
			best = Rise{After: r.n - 1 - i, Stat: t, Before: m0, Mean: m1}
		}
	}
	return best
}

// isFinite reports whether v is neither NaN nor infinite.
func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
