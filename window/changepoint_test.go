package window

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// ringOf returns a ring holding vs, oldest first, after pushing pad values
// of 0.5 first that wrap it around (so the physical order differs from the
// logical one).
func ringOf(vs []float64, pad int) *Ring[float64] {
	r := NewRing[float64](len(vs))
	for range pad {
		r.Push(0.5)
	}
	for _, v := range vs {
		r.Push(v)
	}
	return r
}

// bruteRise evaluates T = n0·n1/n·(μ̂1 − μ̂0)² at every split from the
// two segments' means computed afresh (O(n²), no running sums) and returns
// the newest maximizer among the splits whose newer mean is higher (n1 = 0
// when none), skipping non-finite values as EstimateRise documents. (The
// window package imports only the standard library, its tests too.)
func bruteRise(vs []float64) (after int, t float64) {
	finite := func(s []float64) []float64 {
		var out []float64
		for _, v := range s {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				out = append(out, v)
			}
		}
		return out
	}
	for i := 1; i < len(vs); i++ {
		a, b := finite(vs[:i]), finite(vs[i:])
		if len(a) == 0 || len(b) == 0 {
			continue
		}
		m0, m1 := mean(a), mean(b)
		n0, n1 := float64(len(a)), float64(len(b))
		if m1 <= m0 {
			continue
		}
		if m1-m0 <= 1e-12*(math.Abs(m0)+math.Abs(m1)) {
			continue
		}
		if v := n0 * n1 / (n0 + n1) * (m1 - m0) * (m1 - m0); v >= t*(1-1e-12) {
			after, t = len(vs)-i, v
		}
	}
	return after, t
}

// TestEstimateRise checks the estimate against a brute-force evaluation of
// the same statistic at every split, and on sequences
// whose answer is known in closed form: a noise-free step (the statistic
// is maximal exactly at the step: T(t) = n0·n1/n·Δ² on the step for the
// split there, and any other split mixes the two levels in one part,
// lowering |μ̂1 − μ̂0| by more than n0·n1 gains; Hinkley 1970), a fall
// only (no rise: zero estimate), and fewer than two finite values.
func TestEstimateRise(t *testing.T) {
	step := func(n, at int, lo, hi float64) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = lo
			if i >= at {
				v[i] = hi
			}
		}
		return v
	}
	for _, tc := range []struct {
		name  string
		vs    []float64
		after int // −1: compare with the brute force only
	}{
		{"step at 900 of 1000", step(1000, 900, 0.1, 0.4), 100},
		{"step at 10 of 1000", step(1000, 10, 0.1, 0.4), 990},
		{"step in the last value", step(50, 49, 0, 1), 1},
		{"fall only", step(100, 60, 0.5, 0.2), 0},
		{"constant", step(100, 0, 0.3, 0.3), 0},
		{"one value", []float64{0.3}, 0},
		{"one finite value", []float64{math.NaN(), 0.3, math.Inf(1)}, 0},
		{"step with NaNs", append(step(200, 150, 0, 1), math.NaN(), math.NaN()), 52},
		{"noisy", noisyStep(1, 2000, 1800, 0.1, 0.05), -1},
		{"noisy with NaNs", withNaN(noisyStep(2, 1500, 500, 0.3, 0.02), 7), -1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for _, pad := range []int{0, len(tc.vs) / 3} {
				got := EstimateRise(ringOf(tc.vs, pad))
				wantAfter, wantT := bruteRise(tc.vs)
				if got.After != wantAfter || math.Abs(got.Stat-wantT) > 1e-9*max(1, wantT) {
					t.Errorf("pad %d: %+v, brute force after %d T %v", pad, got, wantAfter, wantT)
				}
				if tc.after >= 0 && got.After != tc.after {
					t.Errorf("pad %d: after %d, want %d", pad, got.After, tc.after)
				}
				if got.After > 0 && !(got.Mean > got.Before) {
					t.Errorf("pad %d: means %v → %v are not a rise", pad, got.Before, got.Mean)
				}
			}
		})
	}
}

// noisyStep returns n values N(0, sd²) clipped to [0, 1] around 0.2 before
// index at and 0.2 + rise from there.
func noisyStep(seed uint64, n, at int, rise, sd float64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 7))
	v := make([]float64, n)
	for i := range v {
		m := 0.2
		if i >= at {
			m += rise
		}
		v[i] = min(1, max(0, m+sd*rng.NormFloat64()))
	}
	return v
}

// withNaN sets every k-th value to NaN.
func withNaN(v []float64, k int) []float64 {
	for i := k - 1; i < len(v); i += k {
		v[i] = math.NaN()
	}
	return v
}

// TestEstimateRiseAccuracy measures the error of the estimate on Bernoulli
// losses (a model that misses a record with probability p0 before the
// change and p1 after; p(1−p) is the variance, as for the 0/1 Brier term
// of a sharp classifier) with 200 values after the change in a sequence of
// 10,000, over 200 seeds. The maximum-likelihood change point is
// consistent with an error that does not grow with n, of order
// p(1−p)/(p1 − p0)² values (Hinkley 1970, "Inference about the change-point
// in a sequence of random variables", Biometrika 57; the order is value
// from memory): asserted here as a median |error| of at most 10% of the
// 200 post-change values for rises of 0.2 and more (0.05 → 0.25, where
// p(1−p)/Δ² is about 1 to 5 values, and 0.05 → 0.5); the rise 0.1 → 0.2
// is logged only.
func TestEstimateRiseAccuracy(t *testing.T) {
	const n, post, runs = 10000, 200, 200
	for _, tc := range []struct{ p0, p1 float64 }{{0.05, 0.25}, {0.05, 0.5}, {0.1, 0.2}} {
		t.Run(fmt.Sprintf("p=%.2f→%.2f", tc.p0, tc.p1), func(t *testing.T) {
			errs := make([]float64, runs)
			early := 0
			r := NewRing[float64](n)
			for s := range runs {
				rng := rand.New(rand.NewPCG(uint64(s), 11))
				for i := range n {
					p := tc.p0
					if i >= n-post {
						p = tc.p1
					}
					v := 0.0
					if rng.Float64() < p {
						v = 1
					}
					r.Push(v)
				}
				got := EstimateRise(r).After
				errs[s] = math.Abs(float64(got - post))
				if got > post {
					early++
				}
			}
			slices.Sort(errs)
			med, p90 := errs[runs/2], errs[runs*9/10]
			t.Logf("|error| over %d runs: median %.0f, 90th percentile %.0f values; estimate before the change in %d runs", runs, med, p90, early)
			if tc.p1-tc.p0 >= 0.2 && med > 0.1*post {
				t.Errorf("median |error| %.0f values, want at most %.0f", med, 0.1*post)
			}
		})
	}
}

// mean returns the mean of a non-empty slice.
func mean(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// TestEstimateRiseAllocs: the estimate does not allocate.
func TestEstimateRiseAllocs(t *testing.T) {
	r := ringOf(noisyStep(3, 2000, 1800, 0.2, 0.1), 500)
	if a := testing.AllocsPerRun(10, func() { EstimateRise(r) }); a != 0 {
		t.Errorf("%v allocations per estimate, want 0", a)
	}
}

// ExampleEstimateRise locates a rise of a loss from 0.1 to 0.4 that
// happened 30 values ago.
func ExampleEstimateRise() {
	r := NewRing[float64](200)
	for i := range 200 {
		v := 0.1
		if i >= 170 {
			v = 0.4
		}
		r.Push(v)
	}
	rise := EstimateRise(r)
	fmt.Printf("change %d values ago, mean %.1f → %.1f\n", rise.After, rise.Before, rise.Mean)
	// Output: change 30 values ago, mean 0.1 → 0.4
}

// BenchmarkEstimateRise: one estimate over a full trail of the default
// window's size (12,500 values), the cost paid once per performance alert.
func BenchmarkEstimateRise(b *testing.B) {
	r := ringOf(noisyStep(4, 12500, 12300, 0.2, 0.1), 0)
	b.ReportAllocs()
	for b.Loop() {
		EstimateRise(r)
	}
}
