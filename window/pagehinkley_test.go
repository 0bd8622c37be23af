package window

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// TestPageHinkleyStepDelay feeds 5000 values of N(0.5, 0.1²) and then
// N(0.5+Δ, 0.1²) and measures the delay to the first signal over 20 seeds.
//
// Expected (the drift argument behind the test, Page 1954): after the
// step, m_t grows by about Δ − δ per value while M_t stays put, so it
// crosses λ after about λ/(Δ − δ) values; x̄ moves by only Δ·k/(5000+k)
// and the fading factor loses about 1% over 100 values, so both are
// second order.
//
// Measured (TestSoakPageHinkley: 200 seeds of rand.NewPCG(seed, 41)):
// Δ = 0.25: 184–232, mean 207.2 (expected 204.1); Δ = 0.5: 92–107, mean
// 101.2 (101.0); Δ = 1: 46–53, mean 50.2 (50.3). The test asks each delay
// to be within ±25% of the expectation and the mean within ±5%.
func TestPageHinkleyStepDelay(t *testing.T) {
	const pre, seeds = 5000, 20
	for _, step := range []float64{0.25, 0.5, 1} {
		t.Run(fmt.Sprint("step=", step), func(t *testing.T) {
			want := DefaultPHThreshold / (step - DefaultPHDelta)
			total := 0
			for seed := uint64(1); seed <= seeds; seed++ {
				rng := rand.New(rand.NewPCG(seed, 4))
				p := NewPageHinkley(nil)
				for range pre {
					if p.Add(0.5 + 0.1*rng.NormFloat64()) {
						t.Fatalf("seed %d: false alarm before the step", seed)
					}
				}
				delay := -1
				for i := 1; i <= 10*int(want); i++ {
					if p.Add(0.5 + step + 0.1*rng.NormFloat64()) {
						delay = i
						break
					}
				}
				if math.Abs(float64(delay)-want) > 0.25*want {
					t.Fatalf("seed %d: delay %d, want %.0f ± 25%%", seed, delay, want)
				}
				total += delay
			}
			mean := float64(total) / seeds
			t.Logf("mean delay %.1f, expected %.1f", mean, want)
			if math.Abs(mean-want) > 0.05*want {
				t.Fatalf("mean delay %.1f, want %.1f ± 5%%", mean, want)
			}
		})
	}
}

// phARL is the expected run length to a false signal of a reflected
// Brownian motion with drift −δ and variance σ² per value, started at 0,
// to reach λ: (σ²/(2δ²))·(e^a − 1 − a), a = 2δλ/σ² (the standard
// first-passage result used to approximate CUSUM run lengths, e.g.
// Siegmund 1985, "Sequential Analysis", Springer; value from memory).
// The discrete test overshoots λ and the fading factor only shrinks PH, so
// both lengthen the real run length: n/phARL bounds the expected number
// of false signals from above.
func phARL(delta, lambda, sd float64) float64 {
	a := 2 * delta * lambda / (sd * sd)
	return sd * sd / (2 * delta * delta) * (math.Expm1(a) - a)
}

// TestPageHinkleyFalseAlarms counts signals on stationary N(0.5, σ²)
// streams with the default options (5 seeds × 100k values per σ).
//
// λ is in the units of the values, so the false-alarm rate depends on σ;
// the approximation phARL predicts, per 100k values: σ = 0.1: 1e-19;
// 0.2: 0.0005; 0.3: 0.22; 0.4: 1.68; 0.5: 4.56. Measured
// (TestSoakPageHinkley: seeds 1–20 of rand.NewPCG(seed, 31), 100k each):
// 0, 0, 0, 0.70, 2.85, below the prediction as expected. The assertion is
// 2× the prediction + 2 over the 5 streams; it fails with λ halved
// (measured: 110 signals at σ = 0.5).
func TestPageHinkleyFalseAlarms(t *testing.T) {
	const n, seeds = 100_000, 5
	for _, sd := range []float64{0.1, 0.3, 0.5} {
		t.Run(fmt.Sprint("sd=", sd), func(t *testing.T) {
			alarms := 0
			for seed := uint64(1); seed <= seeds; seed++ {
				rng := rand.New(rand.NewPCG(seed, 5))
				p := NewPageHinkley(nil)
				for range n {
					if p.Add(0.5 + sd*rng.NormFloat64()) {
						alarms++
					}
				}
			}
			predicted := n * seeds / phARL(DefaultPHDelta, DefaultPHThreshold, sd)
			bound := 2*predicted + 2
			t.Logf("%d alarms in %d×%d values (predicted at most %.2f, bound %.1f)", alarms, seeds, n, predicted, bound)
			if float64(alarms) > bound {
				t.Fatalf("%d false alarms, bound %.1f", alarms, bound)
			}
		})
	}
}

// TestPageHinkleyOneSided checks that a decrease of the mean (the loss
// going down) is not signalled.
func TestPageHinkleyOneSided(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	p := NewPageHinkley(nil)
	for i := range 25000 {
		mu := 0.5
		if i >= 5000 {
			mu = 0
		}
		if p.Add(mu + 0.1*rng.NormFloat64()) {
			t.Fatalf("signal at %d on a decrease", i)
		}
	}
}

// TestPageHinkleyMinInstances feeds 0 and then 1000s: PH_t exceeds λ from
// the 2nd value on, so the first signal comes exactly at MinInstances
// (or at 2 when MinInstances is 1).
func TestPageHinkleyMinInstances(t *testing.T) {
	tests := []struct {
		name string
		o    *PageHinkleyOptions
		want int
	}{
		{"default", nil, 30},
		{"one", &PageHinkleyOptions{MinInstances: 1}, 2},
		{"ten", &PageHinkleyOptions{MinInstances: 10}, 10},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p := NewPageHinkley(tc.o)
			got := 0
			for i := 1; i <= 100 && got == 0; i++ {
				x := 1000.0
				if i == 1 {
					x = 0
				}
				if p.Add(x) {
					got = i
				}
			}
			if got != tc.want {
				t.Fatalf("first signal at %d, want %d", got, tc.want)
			}
			if s := p.Statistic(); !(s > p.Threshold()) {
				t.Fatalf("Statistic after the signal = %v, want > %v", s, p.Threshold())
			}
			p.Add(1000)
			if p.Count() != 1 || p.Statistic() != 0 {
				t.Fatalf("after the signal: Count %d, Statistic %v; want a fresh start", p.Count(), p.Statistic())
			}
		})
	}
}

// TestPageHinkleyHandComputed checks the recursion on three values with
// α = 0.5, δ = 0.1 (values computed by hand):
//
//	x = 1: x̄ = 1, PH = max(0, 0.5·0   + 1 − 1 − 0.1) = 0
//	x = 3: x̄ = 2, PH = max(0, 0.5·0   + 3 − 2 − 0.1) = 0.9
//	x = 5: x̄ = 3, PH = max(0, 0.5·0.9 + 5 − 3 − 0.1) = 2.35
func TestPageHinkleyHandComputed(t *testing.T) {
	p := NewPageHinkley(&PageHinkleyOptions{Delta: 0.1, Alpha: 0.5, Threshold: 2.3, MinInstances: 1})
	for i, tc := range []struct {
		x, ph  float64
		change bool
	}{{1, 0, false}, {3, 0.9, false}, {5, 2.35, true}} {
		if got := p.Add(tc.x); got != tc.change {
			t.Fatalf("value %d: change %v, want %v", i, got, tc.change)
		}
		if got := p.Statistic(); math.Abs(got-tc.ph) > 1e-12 {
			t.Fatalf("value %d: PH = %.15g, want %v", i, got, tc.ph)
		}
	}
}

// TestPageHinkleyOptions checks the defaults and the replacement of invalid
// options. Source of the expected defaults δ 0.005, λ 50, α 0.9999, 30:
// widely used settings, value from memory (common practice, no single
// source).
func TestPageHinkleyOptions(t *testing.T) {
	tests := []struct {
		name string
		o    *PageHinkleyOptions
		want PageHinkley
	}{
		{"nil", nil, PageHinkley{delta: 0.005, lambda: 50, alpha: 0.9999, minN: 30}},
		{"bad", &PageHinkleyOptions{Delta: math.NaN(), Threshold: -1, Alpha: 1.5, MinInstances: -2},
			PageHinkley{delta: 0.005, lambda: 50, alpha: 0.9999, minN: 30}},
		{"no fading", &PageHinkleyOptions{Delta: 0.01, Threshold: 5, Alpha: 1, MinInstances: 3},
			PageHinkley{delta: 0.01, lambda: 5, alpha: 1, minN: 3}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := *NewPageHinkley(tc.o); got != tc.want {
				t.Fatalf("got %+v, want %+v", got, tc.want)
			}
		})
	}
	p := NewPageHinkley(nil)
	for _, x := range []float64{math.NaN(), math.Inf(1), 1, math.Inf(-1)} {
		p.Add(x)
	}
	if p.Count() != 1 || math.IsNaN(p.Statistic()) {
		t.Fatalf("non-finite values were not ignored: Count %d, Statistic %v", p.Count(), p.Statistic())
	}
}

func TestPageHinkleyAddAllocs(t *testing.T) {
	p := NewPageHinkley(nil)
	x := 0.0
	if a := testing.AllocsPerRun(1000, func() { x += 0.01; p.Add(x) }); a != 0 {
		t.Fatalf("Add allocates %v times per call", a)
	}
}

func BenchmarkPageHinkleyAdd(b *testing.B) {
	p := NewPageHinkley(nil)
	rng := rand.New(rand.NewPCG(1, 2))
	xs := make([]float64, 1<<12)
	for i := range xs {
		xs[i] = 0.5 + 0.1*rng.NormFloat64()
	}
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		p.Add(xs[i&(len(xs)-1)])
	}
}

func ExamplePageHinkley() {
	p := NewPageHinkley(nil) // δ = 0.005, λ = 50, α = 0.9999
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range 3000 {
		loss := 0.3 + 0.05*rng.NormFloat64()
		if i >= 2000 {
			loss += 0.5 // the model's loss steps up at record 2000
		}
		if p.Add(loss) {
			fmt.Printf("increase signalled at record %d (statistic %.1f > %v)\n", i, p.Statistic(), p.Threshold())
		}
	}
	// Output:
	// increase signalled at record 2101 (statistic 50.3 > 50)
}
