package online

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// friedman1 fills x with uniform features on [0, 1] and returns
// y = 10 sin(πx₁x₂) + 20(x₃ − 0.5)² + 10x₄ + 5x₅ + ε, ε ~ N(0, 1): only the
// first five features matter (Friedman 1991, "Multivariate adaptive
// regression splines", Annals of Statistics 19(1), the first test function).
func friedman1(rng *rand.Rand, x []float64) float64 {
	for j := range x {
		x[j] = rng.Float64()
	}
	return 10*math.Sin(math.Pi*x[0]*x[1]) + 20*(x[2]-0.5)*(x[2]-0.5) + 10*x[3] + 5*x[4] + rng.NormFloat64()
}

// selectRun is the outcome of streaming one Friedman #1 sample.
type selectRun struct {
	chosen  []int // Chooser.Current after each retune
	support []int // features with a nonzero coefficient in the final choice
}

// streamFriedman streams n records of Friedman #1 with p features through a
// lasso ladder, every 5th record held out (the default holdout.every of
// README.md, "How λ is chosen and how to read alerts"), and
// retunes with the one-SE rule and hysteresis every `every` records, after
// the daemon's default idle steps and, if converge is set, a full
// convergence (a quiet stream).
func streamFriedman(t testing.TB, seed uint64, n, p, every int, converge bool) selectRun {
	t.Helper()
	l, err := NewLadder(&Options{Features: p, Seed: seed})
	if err != nil {
		t.Fatal(err)
	}
	h := NewHoldout(p, 2000)
	h.SetLoss(l.Loss())
	c := Chooser{Rule: RuleOneSE}
	rng := rand.New(rand.NewPCG(seed, 1991))
	x := make([]float64, p)
	var run selectRun
	scores := make([]Score, 0, l.Size())
	for i := 1; i <= n; i++ {
		r := Record{X: x, Y: friedman1(rng, x)}
		add := l.Add
		if i%5 == 0 {
			add = h.Add
		}
		if err := add(r); err != nil {
			t.Fatal(err)
		}
		if i%every == 0 {
			l.Idle(selectIdle)
			if converge {
				l.Converge(1e-4, 1000)
			}
			scores = l.Score(h, scores)
			idx, _ := c.Update(scores)
			run.chosen = append(run.chosen, idx)
		}
	}
	m := l.Model(c.Current())
	for j, v := range m.Standardized {
		if v != 0 {
			run.support = append(run.support, j)
		}
	}
	return run
}

const selectIdle = 64 // idle steps per member before each retune (the config default)

// TestSelectFriedman checks that the one-SE choice on held-out data keeps
// the strong linear signals x₄ and x₅ and drops the pure-noise features
// x₆ … x₁₀ (Friedman 1991: only x₁ … x₅ enter y), in at least 4 of 5 seeds,
// and that on this stationary stream λ*/λ_max does not rise as the window
// fills (more data supports a smaller λ; ESL §7.10 and the λ ~ σ√(log p / n)
// scaling of the lasso, Hastie, Tibshirani & Wainwright 2015 ch. 11).
func TestSelectFriedman(t *testing.T) {
	tests := []struct {
		name     string
		p        int
		converge bool
	}{
		{"p=10 streamed", 10, false},
		{"p=20 converged", 20, true},
	}
	const seeds, n, every = 5, 5000, 500
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			good := 0
			for seed := uint64(1); seed <= seeds; seed++ {
				run := streamFriedman(t, seed, n, tc.p, every, tc.converge)
				ok := slices.Contains(run.support, 3) && slices.Contains(run.support, 4)
				for _, j := range run.support {
					if j >= 5 {
						ok = false
					}
				}
				if ok {
					good++
				}
				t.Logf("seed %d: λ* index per retune %v, support %v, ok=%v", seed, run.chosen, plusOne(run.support), ok)
				for i := 1; i < len(run.chosen); i++ {
					if run.chosen[i] < run.chosen[i-1] {
						t.Errorf("seed %d: λ* rose (index %d → %d) at retune %d", seed, run.chosen[i-1], run.chosen[i], i)
					}
				}
			}
			if good < 4 {
				t.Errorf("one-SE support right in %d of %d seeds, want ≥ 4", good, seeds)
			}
		})
	}
}

// plusOne renders 0-based feature indices as the 1-based x names.
func plusOne(s []int) string {
	var b strings.Builder
	for i, j := range s {
		if i > 0 {
			b.WriteByte(' ')
		}
		fmt.Fprintf(&b, "x%d", j+1)
	}
	return b.String()
}
