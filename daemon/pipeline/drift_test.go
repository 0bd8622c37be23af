package pipeline

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"lariat/config"
	"lariat/sink"
)

// seaRun feeds a SEA stream (Street & Kim 2001) through a logistic model's
// real watch: warm records on the first concept θ = 8, then each later
// concept of seaThetas for per records. It returns the detection delay
// after each abrupt change (records from the change to the first
// performance alert; −1 if none before the next change) and the number of
// performance alerts before the first change.
func seaRun(t testing.TB, perf string, seed uint64, noise float64, warm, per int) (delays []int, early int) {
	m := driftModel("sea", config.LossLogistic, []string{"f1", "f2", "f3"}, 4000)
	m.Drift.Performance = perf
	h := newHarness(t, m)
	s := newSEA(seed, seaThetas[0], noise)
	x := make([]float64, 3)
	for range warm {
		h.feed(x, s.next(x))
	}
	early = len(h.alertsOf(sink.KindPerformance))
	for c := 1; c < len(seaThetas); c++ {
		s.theta = seaThetas[c]
		// Alerts are counted on the watch (the store keeps only the last 100).
		before := h.watch().stats.detected[0]
		delay := -1
		for i := 1; i <= per; i++ {
			h.feed(x, s.next(x))
			if delay < 0 && h.watch().stats.detected[0] > before {
				delay = i
			}
		}
		delays = append(delays, delay)
	}
	return delays, early
}

// TestDriftDetectionDelaySEA measures how many records the performance
// watch needs to report an abrupt SEA concept change (Street & Kim 2001:
// θ 8 → 9 → 7 → 9.5), through the real per-model watch fed with the
// ladder's test-then-train loss by worker.apply, for ADWIN and
// Page-Hinkley, without and with 10% label noise.
//
// With 10% noise the logistic model of SEA is shallow (p moves from 0.8 to
// 0.3 across the whole feature range) and the changes 8 → 9 and 9 → 7 move
// the mean Brier term by about 0.02, which the learner's own window absorbs
// before either detector has the evidence: those delays are logged, not
// asserted. The change 7 → 9.5 (20.6% of the records change label) is
// asserted with noise.
func TestDriftDetectionDelaySEA(t *testing.T) {
	seeds := []uint64{1, 2, 3}
	if testing.Short() {
		seeds = seeds[:1]
	}
	const warm, per = 12000, 6000
	for _, tc := range []struct {
		perf  string
		noise float64
		all   bool // assert every change (else only the last, 7 → 9.5)
		bound int  // records; measured maxima are in the report
	}{
		{config.DriftADWIN, 0, true, 1000},
		{config.DriftADWIN, 0.1, false, 2000},
		{config.DriftPageHinkley, 0, true, 3000},
		{config.DriftPageHinkley, 0.1, false, 4000},
	} {
		t.Run(fmt.Sprintf("%s/noise=%.0f%%", tc.perf, 100*tc.noise), func(t *testing.T) {
			var asserted []int
			for _, seed := range seeds {
				delays, early := seaRun(t, tc.perf, seed, tc.noise, warm, per)
				t.Logf("seed %d: delays after θ → %v: %v records (−1: not detected within %d); performance alerts before the first change: %d",
					seed, seaThetas[1:], delays, per, early)
				if early != 0 {
					t.Errorf("seed %d: %d performance alerts on the stationary first concept", seed, early)
				}
				if tc.all {
					asserted = append(asserted, delays...)
				} else {
					asserted = append(asserted, delays[len(delays)-1])
				}
			}
			slices.Sort(asserted)
			t.Logf("asserted delays: %v (median %d, bound %d)", asserted, asserted[len(asserted)/2], tc.bound)
			for _, d := range asserted {
				if d < 0 || d > tc.bound {
					t.Errorf("delay %d records: want a detection within %d", d, tc.bound)
				}
			}
		})
	}
}

// TestDriftFalseAlarms counts the alerts of every kind on stationary
// streams over 100k records after the warm-up, with no cooldown (every
// detection is an alert): SEA with 10% noise (ADWIN and Page-Hinkley) and
// Friedman #1 (squared loss, ADWIN). ADWIN's δ = 0.002 bounds the
// probability of a false cut per check (Bifet & Gavaldà 2007) for values in
// [0, 1], which the bounded loss guarantees; with 3125 checks per 100k
// records that union bound alone would allow several, so the bounds
// asserted are what this design measured with margin, not a theorem: at
// most 2 performance and 2 data alerts per 100k per run, and at most 5
// model alerts (measured 1 to 4: an irrelevant feature of Friedman #1 or
// SEA's f3 entering the lasso's support for three retunes and leaving
// again; model alerts are severity info, and the default 10-minute
// cooldown spaces them further).
func TestDriftFalseAlarms(t *testing.T) {
	const n = 100000
	runs := []faRun{
		{"sea", config.DriftADWIN, config.LossLogistic, 11, 3, 4000},
		{"sea", config.DriftADWIN, config.LossLogistic, 12, 3, 4000},
		{"sea", config.DriftPageHinkley, config.LossLogistic, 13, 3, 2000}, // n_s = 500
		{"friedman1", config.DriftADWIN, config.LossSquared, 14, 10, 4000},
	}
	if testing.Short() {
		runs = runs[:1]
	}
	for _, r := range runs {
		t.Run(fmt.Sprintf("%s/%s/seed=%d", r.stream, r.perf, r.seed), func(t *testing.T) {
			st := r.count(t, n)
			for i, k := range []sink.AlertKind{sink.KindPerformance, sink.KindData, sink.KindModel} {
				if bound := []int{2, 2, 5}[i]; st.detected[i] > bound {
					t.Errorf("%d %s alerts per %d stationary records, want at most %d", st.detected[i], k, n, bound)
				}
			}
		})
	}
}

// faRun is one stationary stream of the false-alarm measurements.
type faRun struct {
	stream string // "sea" (10% noise, θ = 8) or "friedman1" (σ = 1)
	perf   string
	loss   string
	seed   uint64
	d      int
	window int
}

// count feeds the warm-up (one window and its held-out share) and then n
// stationary records through the model's watch, and returns its counts.
func (r faRun) count(t testing.TB, n int) watchStats {
	m := driftModel("fa", r.loss, featureNames(r.d), r.window)
	m.Drift.Performance = r.perf
	h := newHarness(t, m)
	wt := h.watch()
	next := newSEA(r.seed, 8, 0.1).next
	if r.stream == "friedman1" {
		next = newFriedman1(r.seed, 1).next
	}
	x := make([]float64, r.d)
	for range r.window + r.window/4 + 1 {
		h.feed(x, next(x))
	}
	if !wt.warm {
		t.Fatal("not warm after the first window")
	}
	for range n {
		h.feed(x, next(x))
	}
	st := wt.stats
	t.Logf("%s/%s seed %d window %d: per %d records: performance %d, data %d, model %d; adaptations %d; detector cuts on a decrease %d, on an immaterial increase %d",
		r.stream, r.perf, r.seed, r.window, n, st.detected[0], st.detected[1], st.detected[2], st.adaptations, st.recoveries, st.minor)
	return st
}

// TestDriftSupportAdapts switches the informative feature of a linear
// stream from x1 to x3 (switchStream) and measures after how many records
// the chosen member's support holds x3 and not x1, with drift.adapt on and
// off. With adaptation the window shrinks to the post-change records that
// ADWIN kept, so the support must move within a bounded number of records
// (asserted) and sooner than without (asserted). Source: the bound 2500 is
// measured in this repository, no external source (seeds 21, 22, 23: 750,
// 2000 and 500 records with adaptation; 4750, 7500 and 4750 without); the
// detector is ADWIN (Bifet & Gavaldà 2007).
func TestDriftSupportAdapts(t *testing.T) {
	seeds := []uint64{21, 22, 23}
	if testing.Short() {
		seeds = seeds[:1]
	}
	const warm, after, bound = 8000, 8000, 2500
	measure := func(seed uint64, adapt bool) (int, *watch) {
		m := driftModel("switch", config.LossSquared, featureNames(5), 4000)
		m.Drift.Adapt = adapt
		h := newHarness(t, m)
		s := &switchStream{rng: rand.New(rand.NewPCG(seed, 3)), k: 0}
		x := make([]float64, 5)
		for range warm {
			h.feed(x, s.next(x))
		}
		s.k = 2
		for i := 1; i <= after; i++ {
			h.feed(x, s.next(x))
			if i%h.p.cfg.Retune.Every != 0 {
				continue
			}
			m := h.p.ladder.Model(h.p.current())
			if m.Coef[2] != 0 && m.Coef[0] == 0 {
				return i, h.watch()
			}
		}
		return -1, h.watch()
	}
	for _, seed := range seeds {
		with, wt := measure(seed, true)
		without, _ := measure(seed, false)
		t.Logf("seed %d: support {x3} without x1 after %d records with adaptation (%d adaptations, %d performance alerts), %d without",
			seed, with, wt.stats.adaptations, wt.stats.detected[0], without)
		if with < 0 || with > bound {
			t.Errorf("seed %d: support adapted after %d records with drift.adapt, want within %d", seed, with, bound)
		}
		if without >= 0 && with >= without {
			t.Errorf("seed %d: adaptation (%d records) no faster than without (%d)", seed, with, without)
		}
	}
}

// TestDriftHyperplane runs the rotating hyperplane (Hulten, Spencer &
// Domingos 2001) with gradual drift and compares the prequential mean
// Brier term (Gama, Sebastião & Rodrigues 2013: test-then-train) with
// drift.adapt on and off. Gradual drift has no change point; the test
// asserts only that adapting does not make the model measurably worse
// (within 0.01 of the Brier score) and logs the figures.
func TestDriftHyperplane(t *testing.T) {
	if testing.Short() {
		t.Skip("long stream")
	}
	// σ = 0.01 per record: the weights, initially in [0, 1], wander by
	// about σ·√(10·n) ≈ 8 over the stream (direction kept ~10 records).
	const n, d, sigma = 60000, 5, 0.01
	brier := func(adapt bool) (float64, *watch) {
		m := driftModel("plane", config.LossLogistic, featureNames(d), 4000)
		m.Drift.Adapt = adapt
		h := newHarness(t, m)
		g := newHyperplane(31, d, sigma, 0.05)
		x := make([]float64, d)
		var sum float64
		var cnt int
		for i := range n {
			y := g.next(x)
			if c := h.p.current(); c >= 0 && i >= 10000 {
				p := 1 / (1 + math.Exp(-h.p.ladder.Eta(c, x)))
				sum += (p - y) * (p - y)
				cnt++
			}
			h.feed(x, y)
		}
		return sum / float64(cnt), h.watch()
	}
	on, wt := brier(true)
	off, _ := brier(false)
	t.Logf("prequential Brier over records 10k..60k: %.4f with adaptation (%d performance alerts, %d adaptations), %.4f without",
		on, wt.stats.detected[0], wt.stats.adaptations, off)
	if on > off+0.01 {
		t.Errorf("adaptation made the Brier score worse: %.4f vs %.4f", on, off)
	}
}
