package pipeline

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"lariat/config"
	"lariat/online"
)

// cutProbe follows one model through a stream with known abrupt changes
// and measures each adaptation against the true change point: how many of
// the records left in the train window and the held-out ring arrived
// before the change. It counts train and held-out records since the last
// change itself, from the Step of every Apply, not from the watch.
type cutProbe struct {
	h                    *harness
	sinceTrain, sinceHld int // records of each kind since the last change
	seen                 int // records since the last change
	alertAt              int // records after the change at its first performance alert (−1: none yet)
	cutAt                int // records after the change at its first adaptation (−1: none yet)
	preTrain, preHeld    float64
	train, held          int // window sizes right after that adaptation
}

func newCutProbe(h *harness) *cutProbe { return &cutProbe{h: h, alertAt: -1, cutAt: -1} }

// change marks the next record as the first after a change.
func (c *cutProbe) change() {
	c.sinceTrain, c.sinceHld, c.seen, c.alertAt, c.cutAt = 0, 0, 0, -1, -1
}

// feed applies one record and, at the first adaptation after the change,
// measures the pre-change fractions of both windows.
func (c *cutProbe) feed(x []float64, y float64) {
	before := c.h.watch().stats.detected[0]
	c.h.feed(x, y)
	st := &c.h.p.step
	c.seen++
	if st.HeldOut {
		c.sinceHld++
	} else {
		c.sinceTrain++
	}
	if c.alertAt < 0 && c.h.watch().stats.detected[0] > before {
		c.alertAt = c.seen
	}
	if c.cutAt >= 0 || !st.Adapted || c.alertAt < 0 {
		return
	}
	c.cutAt = c.seen
	c.train, c.held = c.h.p.ladder.Len(), c.h.p.HeldOutLen()
	c.preTrain = float64(max(c.train-c.sinceTrain, 0)) / float64(max(c.train, 1))
	c.preHeld = float64(max(c.held-c.sinceHld, 0)) / float64(max(c.held, 1))
}

// defaultDriftModel is the daemon's default model (window 10,000, holdout
// every 5th record up to 2,000, ladder of 12, retune every 500, one-se,
// ADWIN δ 0.002, adaptation on) with a fixed feature list.
func defaultDriftModel(name, loss string, features []string) config.Model {
	m := config.DefaultModel()
	m.Name, m.Subject, m.Loss = name, "test."+name, loss
	m.Features, m.MaxFeatures = features, len(features)
	return m
}

// TestDriftCutSEA measures where the window is cut after a performance
// alert on SEA concepts (Street & Kim 2001: f1, f2, f3 uniform on [0, 10],
// label f1 + f2 ≤ θ, θ: 8 → 9 → 7 → 9.5), through the pipeline at the
// daemon's defaults (logistic lasso, window 10,000): right after each
// adaptation, at most 10% of the train window and of the held-out ring may
// predate the change (issue 9, item 5). Without label noise every change is
// asserted; with the paper's 10% noise, the changes 8 → 9 and 9 → 7 are
// mostly absorbed without an alert (README, "What the tests measured"), so
// only the changes that were detected are asserted (not run with -short).
// The same with Page-Hinkley (Page 1954) as the detector, without noise.
func TestDriftCutSEA(t *testing.T) {
	seeds := []uint64{1, 2, 3}
	if testing.Short() {
		seeds = seeds[:1]
	}
	const warm, per, bound = 15000, 8000, 0.10
	runs := []struct {
		perf  string
		noise float64
	}{{config.DriftADWIN, 0}, {config.DriftADWIN, 0.1}, {config.DriftPageHinkley, 0}}
	if testing.Short() {
		runs = runs[:1]
	}
	for _, run := range runs {
		noise := run.noise
		t.Run(fmt.Sprintf("%s/noise=%.0f%%", run.perf, 100*noise), func(t *testing.T) {
			var fracs []float64
			for _, seed := range seeds {
				m := defaultDriftModel("sea", config.LossLogistic, []string{"f1", "f2", "f3"})
				m.Drift.Performance = run.perf
				h := newHarness(t, m)
				c := newCutProbe(h)
				s := newSEA(seed, seaThetas[0], noise)
				x := make([]float64, 3)
				for range warm {
					c.feed(x, s.next(x))
				}
				for k := 1; k < len(seaThetas); k++ {
					s.theta = seaThetas[k]
					c.change()
					for range per {
						c.feed(x, s.next(x))
					}
					t.Logf("seed %d, θ %v → %v: alert after %d records, cut after %d: train window %d (%.1f%% pre-change), held-out ring %d (%.1f%% pre-change)",
						seed, seaThetas[k-1], seaThetas[k], c.alertAt, c.cutAt, c.train, 100*c.preTrain, c.held, 100*c.preHeld)
					if c.cutAt < 0 {
						if noise == 0 {
							t.Errorf("seed %d, θ %v → %v: no adaptation within %d records", seed, seaThetas[k-1], seaThetas[k], per)
						}
						continue
					}
					fracs = append(fracs, c.preTrain, c.preHeld)
					if c.preTrain > bound || c.preHeld > bound {
						t.Errorf("seed %d, θ %v → %v: %.1f%% of the train window and %.1f%% of the held-out ring predate the change, want at most %.0f%%",
							seed, seaThetas[k-1], seaThetas[k], 100*c.preTrain, 100*c.preHeld, 100*bound)
					}
				}
			}
			slices.Sort(fracs)
			if len(fracs) > 0 {
				t.Logf("pre-change fractions after the cuts (train and held out): median %.1f%%, max %.1f%% over %d",
					100*fracs[len(fracs)/2], 100*fracs[len(fracs)-1], len(fracs))
			}
		})
	}
}

// swapStream is an abrupt linear swap: x ~ N(0, I_d) and
// y = 2·x1 + 1.5·x_k + x3 + N(0, 1), with the test moving the informative
// feature k from x2 (retired) to x4 (new) at the change: the support
// changes while the other coefficients stay. A constructed stream, no
// published source.
type swapStream struct {
	rng *rand.Rand
	k   int
}

func (s *swapStream) next(x []float64) float64 {
	for j := range x {
		x[j] = s.rng.NormFloat64()
	}
	return 2*x[0] + 1.5*x[s.k] + x[2] + s.rng.NormFloat64()
}

// TestDriftCutSwap runs the abrupt linear swap (swapStream, 16 features)
// through the pipeline at the daemon's defaults (squared-loss lasso, window
// 10,000) and measures, after the change: the pre-change share of the
// train window and of the held-out ring right after the adaptation (at
// most 10%, issue 9 item 5), and after how many records from the
// performance alert the support of the chosen λ has x4 and not x2 and
// keeps it that way for the rest of the run (within 1,000, issue 9
// item 5), checked every 50 records (every 250 over 1,500 records with
// -short).
//
// The support is asserted on the optimum of the chosen λ on the current
// window: a copy of the ladder converged to a KKT violation of 1e-6
// (Ladder.Converge; the KKT conditions of the lasso, Hastie, Tibshirani &
// Wainwright 2015, ch. 2), which is what the window holds. The streaming
// members of today's learner keep coefficients of order 1e-3 on a feature
// whose optimum is 0 for a long while (issue 9, item 1); their support is
// logged beside it.
func TestDriftCutSwap(t *testing.T) {
	seeds := []uint64{41, 42, 43}
	if testing.Short() {
		seeds = seeds[:1]
	}
	const d, warm = 16, 15000
	const bound, supportBound = 0.10, 1000
	after, every := 3000, 50
	if testing.Short() { // the converged copies dominate, under -race most of all
		after, every = 1500, 250
	}
	for _, seed := range seeds {
		h := newHarness(t, defaultDriftModel("swap", config.LossSquared, featureNames(d)))
		c := newCutProbe(h)
		s := &swapStream{rng: rand.New(rand.NewPCG(seed, 9)), k: 1}
		x := make([]float64, d)
		for range warm {
			c.feed(x, s.next(x))
		}
		if m := exactChosen(t, h.p); m.Coef[1] == 0 || m.Coef[3] != 0 {
			t.Fatalf("seed %d: before the change the support of the chosen λ is not {x1, x2, x3}: %v", seed, m.Coef)
		}
		s.k = 3
		c.change()
		exact, stream := settle{from: -1}, settle{from: -1}
		for i := 1; i <= after; i++ {
			c.feed(x, s.next(x))
			if c.alertAt < 0 || (i-c.alertAt)%every != 0 {
				continue
			}
			exact.see(exactChosen(t, h.p).Coef, i-c.alertAt)
			stream.see(h.publish().Model.Coef, i-c.alertAt)
		}
		t.Logf("seed %d: alert after %d records, cut after %d: train window %d (%.1f%% pre-change), held-out ring %d (%.1f%% pre-change)",
			seed, c.alertAt, c.cutAt, c.train, 100*c.preTrain, c.held, 100*c.preHeld)
		t.Logf("seed %d: support {x1, x3, x4} without x2 for good from %d records after the alert (optimum on the window), %d (published streaming member); other features at the end: %d and %d",
			seed, exact.from, stream.from, exact.extra, stream.extra)
		if c.cutAt < 0 {
			t.Errorf("seed %d: no adaptation within %d records of the change", seed, after)
			continue
		}
		if c.preTrain > bound || c.preHeld > bound {
			t.Errorf("seed %d: %.1f%% of the train window and %.1f%% of the held-out ring predate the change, want at most %.0f%%",
				seed, 100*c.preTrain, 100*c.preHeld, 100*bound)
		}
		if exact.from < 0 || exact.from > supportBound {
			t.Errorf("seed %d: the optimum's support adapted %d records after the alert, want within %d", seed, exact.from, supportBound)
		}
	}
}

// settle follows the support of the swap test: from is the first check
// since which every check had x4 and not x2 (−1 before any check and while
// the last one did not), extra the number of features beyond x1, x3, x4 at
// the last check.
type settle struct{ from, extra int }

func (s *settle) see(coef []float64, at int) {
	switch ok := coef[3] != 0 && coef[1] == 0; {
	case !ok:
		s.from = -1
	case s.from < 0:
		s.from = at
	}
	s.extra = 0
	for j, v := range coef {
		if v != 0 && j != 0 && j != 2 && j != 3 {
			s.extra++
		}
	}
}

// exactChosen returns the model of the chosen λ (or member 0 before the
// first choice) from a copy of p's ladder converged on the current window
// to a KKT violation of 1e-6; p is not changed.
func exactChosen(t *testing.T, p *Pipeline) online.Model {
	t.Helper()
	b, err := p.ladder.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	l, err := online.UnmarshalLadder(b)
	if err != nil {
		t.Fatal(err)
	}
	if !l.Converge(1e-6, 200) {
		t.Logf("a ladder copy did not converge to 1e-6 (KKT of the chosen member %.3g)", l.KKT(max(p.current(), 0)))
	}
	return l.Model(max(p.current(), 0))
}

// TestDriftCutAdopts checks the choice of λ* after a drift adaptation
// (README, "Drift alerts"): until the train window has filled again, every
// retune adopts the rule's pick on its scores at once (online.Choose, no
// hysteresis); once it has filled, the hysteresis is back, so a retune
// whose pick differs from the current choice leaves it unchanged (measured
// on the same stream: such retunes occur). The abrupt linear swap at a
// window of 2,000 records. Source: this design's rule (issue 9, item 5).
func TestDriftCutAdopts(t *testing.T) {
	m := defaultDriftModel("adopt", config.LossSquared, featureNames(16))
	m.Window.Records, m.Holdout.Records = 2000, 500
	h := newHarness(t, m)
	s := &swapStream{rng: rand.New(rand.NewPCG(44, 9)), k: 1}
	x := make([]float64, 16)
	for range 6000 {
		h.feed(x, s.next(x))
	}
	s.k = 3
	cut, adopted, held := false, 0, 0
	for range 8000 {
		h.feed(x, s.next(x))
		st := &h.p.step
		cut = cut || st.Adapted
		if !cut || !st.Retuned {
			continue
		}
		pick := online.Choose(h.p.Scores(), online.RuleOneSE)
		switch filling := h.p.adopt; {
		case filling && h.p.Current() != pick:
			t.Errorf("window of %d after the cut: current choice %d, the rule picks %d", h.p.ladder.Len(), h.p.Current(), pick)
		case filling:
			adopted++
		case h.p.Current() != pick:
			held++
		}
	}
	t.Logf("retunes that adopted their pick while the window refilled: %d; retunes after that whose pick the hysteresis held back: %d", adopted, held)
	if !cut || adopted == 0 {
		t.Fatalf("cut %v, %d retunes while the window refilled", cut, adopted)
	}
	if h.p.adopt || held == 0 {
		t.Errorf("adopting %v with a train window of %d of %d; %d picks held back by the hysteresis after the refill, want some",
			h.p.adopt, h.p.ladder.Len(), m.Window.Records, held)
	}
}
