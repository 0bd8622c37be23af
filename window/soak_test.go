//go:build soak

// The larger runs behind the figures quoted in the detector tests'
// comments: go test -tags soak -run Soak -v ./window/ (a few seconds).

package window

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"
)

// delayStats returns min, median, p95, max and mean of ds.
func delayStats(ds []int) string {
	slices.Sort(ds)
	s := 0
	for _, d := range ds {
		s += d
	}
	return fmt.Sprintf("n=%d min %d median %d p95 %d max %d mean %.1f",
		len(ds), ds[0], ds[len(ds)/2], ds[len(ds)*95/100], ds[len(ds)-1], float64(s)/float64(len(ds)))
}

// TestSoakADWINDelay: 200 seeds of the 0.2→0.8 step of TestADWINDetectsStep.
// Source: the detector is ADWIN2 of Bifet & Gavaldà (2007), "Learning from
// time-changing data with adaptive windowing", SDM; the expected first cut
// near 24 values after the change is own arithmetic from that paper's cut
// bound (see TestADWINDetectsStep), and the delay limits 100 (clock 1) and
// 150 (clock 32) are measured in this repository, no external source.
func TestSoakADWINDelay(t *testing.T) {
	for _, tc := range []struct{ clock, maxDelay int }{{1, 100}, {32, 150}} {
		var ds []int
		for seed := uint64(1); seed <= 200; seed++ {
			rng := rand.New(rand.NewPCG(seed, 12345))
			a := NewADWINOptions(&ADWINOptions{Clock: tc.clock})
			for range 5000 {
				a.Add(bernoulli(rng, 0.2))
			}
			d := -1
			for i := 1; i <= 5000; i++ {
				if a.Add(bernoulli(rng, 0.8)) {
					d = i
					break
				}
			}
			if d < 0 || d >= tc.maxDelay {
				t.Errorf("clock %d seed %d: delay %d", tc.clock, seed, d)
			}
			ds = append(ds, d)
		}
		t.Logf("ADWIN clock %d: delay %s", tc.clock, delayStats(ds))
	}
}

// TestSoakADWINFalseAlarms: 20 seeds × 100k stationary values per case,
// held to the bound of Bifet & Gavaldà (2007), "Learning from time-changing
// data with adaptive windowing", SDM, Theorem 3.1 part 1: with a constant
// mean, the probability of a cut at a given check is at most δ, so at most
// δ·100000/Clock false alarms per 100k values are expected.
func TestSoakADWINFalseAlarms(t *testing.T) {
	for _, delta := range []float64{0.002, 0.05, 0.3} {
		for _, p := range []float64{0.1, 0.5} {
			alarms := 0
			for seed := uint64(1); seed <= 20; seed++ {
				rng := rand.New(rand.NewPCG(seed, 777))
				a := NewADWIN(delta)
				for range 100_000 {
					if a.Add(bernoulli(rng, p)) {
						alarms++
					}
				}
			}
			bound := delta * 100_000 / DefaultADWINClock
			rate := float64(alarms) / 20
			t.Logf("ADWIN δ=%v p=%v: %.2f false alarms per 100k (paper bound %.2f)", delta, p, rate, bound)
			if rate > bound {
				t.Errorf("rate %.2f above the bound %.2f", rate, bound)
			}
		}
	}
}

// TestSoakPageHinkley: step delays over 200 seeds and stationary rates over
// 20 × 100k values, against the drift argument and phARL.
func TestSoakPageHinkley(t *testing.T) {
	for _, step := range []float64{0.25, 0.5, 1} {
		var ds []int
		want := DefaultPHThreshold / (step - DefaultPHDelta)
		for seed := uint64(1); seed <= 200; seed++ {
			rng := rand.New(rand.NewPCG(seed, 41))
			p := NewPageHinkley(nil)
			for range 5000 {
				p.Add(0.5 + 0.1*rng.NormFloat64())
			}
			d := -1
			for i := 1; i <= 5000; i++ {
				if p.Add(0.5 + step + 0.1*rng.NormFloat64()) {
					d = i
					break
				}
			}
			if d < 0 || float64(d) < 0.75*want || float64(d) > 1.25*want {
				t.Errorf("step %v seed %d: delay %d, expected %.0f", step, seed, d, want)
			}
			ds = append(ds, d)
		}
		t.Logf("Page-Hinkley step %v: delay %s (λ/(Δ−δ) = %.1f)", step, delayStats(ds), want)
	}
	for _, sd := range []float64{0.1, 0.2, 0.3, 0.4, 0.5} {
		alarms := 0
		for seed := uint64(1); seed <= 20; seed++ {
			rng := rand.New(rand.NewPCG(seed, 31))
			p := NewPageHinkley(nil)
			for range 100_000 {
				if p.Add(0.5 + sd*rng.NormFloat64()) {
					alarms++
				}
			}
		}
		predicted := 100_000 / phARL(DefaultPHDelta, DefaultPHThreshold, sd)
		rate := float64(alarms) / 20
		t.Logf("Page-Hinkley σ=%v: %.2f false alarms per 100k (predicted at most %.4f)", sd, rate, predicted)
		if rate > 2*predicted+0.1 {
			t.Errorf("rate %.2f above 2×%.4f+0.1", rate, predicted)
		}
	}
}
