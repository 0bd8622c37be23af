package online

import (
	"math"
	"testing"
)

// lossSuite lists every Loss with labels in its domain.
var lossSuite = []struct {
	loss   Loss
	labels []float64
}{
	{Squared{}, []float64{-3, 0, 0.5, 2}},
	{Logistic{}, []float64{0, 1}},
}

var etaGrid = []float64{-30, -5, -1.5, -0.3, 0, 0.2, 1, 4, 25}

// TestLossDerivative checks Deriv against a central finite difference of
// Value, step 1e-5, tolerance 1e-6 (common practice, no single source).
func TestLossDerivative(t *testing.T) {
	for _, tc := range lossSuite {
		t.Run(tc.loss.Name(), func(t *testing.T) {
			const h = 1e-5
			for _, y := range tc.labels {
				for _, eta := range etaGrid {
					fd := (tc.loss.Value(y, eta+h) - tc.loss.Value(y, eta-h)) / (2 * h)
					if d := tc.loss.Deriv(y, eta); math.Abs(d-fd) > 1e-6*(1+math.Abs(fd)) {
						t.Errorf("y=%v η=%v: Deriv %v, finite difference %v", y, eta, d, fd)
					}
				}
			}
		})
	}
}

// TestLossCurvature checks that Curvature bounds the second derivative,
// estimated by a central difference of Deriv on a fine grid, and that the
// bound is attained somewhere (tight to 1e-6): 1 for squared, 1/4 at η = 0
// for logistic (value from memory: max σ(1−σ) = 1/4).
func TestLossCurvature(t *testing.T) {
	for _, tc := range lossSuite {
		t.Run(tc.loss.Name(), func(t *testing.T) {
			const h = 1e-4
			c := tc.loss.Curvature()
			var peak float64
			for _, y := range tc.labels {
				for eta := -20.0; eta <= 20; eta += 0.01 {
					d2 := (tc.loss.Deriv(y, eta+h) - tc.loss.Deriv(y, eta-h)) / (2 * h)
					if d2 > c+1e-6 {
						t.Fatalf("y=%v η=%v: ℓ'' ≈ %v > Curvature %v", y, eta, d2, c)
					}
					peak = max(peak, d2)
				}
			}
			if c-peak > 1e-6 {
				t.Errorf("Curvature %v not attained (max ℓ'' ≈ %v)", c, peak)
			}
		})
	}
}

// TestLogisticStable checks value and derivative stay finite and exact in
// the tails for |η| up to 1e4: ℓ(0, η) → η for η ≫ 0 and ℓ(1, η) → −η for
// η ≪ 0, ℓ' → 0 or ±1 (value from memory: softplus asymptotes).
func TestLogisticStable(t *testing.T) {
	var l Logistic
	for _, eta := range []float64{-1e4, -800, -40, 40, 800, 1e4} {
		for _, y := range []float64{0, 1} {
			v, d := l.Value(y, eta), l.Deriv(y, eta)
			if math.IsNaN(v) || math.IsInf(v, 0) || math.IsNaN(d) || math.IsInf(d, 0) {
				t.Fatalf("y=%v η=%v: value %v deriv %v", y, eta, v, d)
			}
			want := math.Max(eta, 0) - y*eta // softplus(η) ≈ max(η, 0) for |η| ≥ 40
			if math.Abs(v-want) > 1e-12*math.Abs(want)+1e-15 {
				t.Errorf("y=%v η=%v: value %v, want %v", y, eta, v, want)
			}
		}
	}
	if d := l.Deriv(0, 1e4); d != 1 {
		t.Errorf("ℓ'(0, 1e4) = %v, want 1", d)
	}
	if d := l.Deriv(1, -1e4); d != -1 {
		t.Errorf("ℓ'(1, −1e4) = %v, want −1", d)
	}
}

// TestLossByName round-trips the names.
func TestLossByName(t *testing.T) {
	for _, tc := range lossSuite {
		if l, ok := LossByName(tc.loss.Name()); !ok || l.Name() != tc.loss.Name() {
			t.Errorf("LossByName(%q) = %v, %v", tc.loss.Name(), l, ok)
		}
	}
	if _, ok := LossByName("hinge"); ok {
		t.Error("LossByName accepted hinge")
	}
}

// TestLossSecondDeriv checks SecondDeriv against a central finite
// difference of Deriv, step 1e-5, tolerance 1e-6 (common practice, no single
// source), that it stays within [0, Curvature], and that Quadratic holds
// exactly when it is constant over the grid.
func TestLossSecondDeriv(t *testing.T) {
	for _, tc := range lossSuite {
		t.Run(tc.loss.Name(), func(t *testing.T) {
			const h = 1e-5
			c := tc.loss.Curvature()
			first := tc.loss.SecondDeriv(tc.labels[0], etaGrid[0])
			constant := true
			for _, y := range tc.labels {
				for _, eta := range etaGrid {
					fd := (tc.loss.Deriv(y, eta+h) - tc.loss.Deriv(y, eta-h)) / (2 * h)
					d2 := tc.loss.SecondDeriv(y, eta)
					if math.Abs(d2-fd) > 1e-6*(1+math.Abs(fd)) {
						t.Errorf("y=%v η=%v: SecondDeriv %v, finite difference %v", y, eta, d2, fd)
					}
					if !(d2 >= 0 && d2 <= c) {
						t.Errorf("y=%v η=%v: SecondDeriv %v outside [0, Curvature %v]", y, eta, d2, c)
					}
					constant = constant && d2 == first
				}
			}
			if q := tc.loss.Quadratic(); q != constant {
				t.Errorf("Quadratic() = %v, but SecondDeriv constant = %v", q, constant)
			}
		})
	}
}

// TestLossMeanDomain checks that Deriv vanishes at y = Mean(η), as the
// derivative of a GLM negative log-likelihood does at the mean (McCullagh &
// Nelder 1989, ch. 2), that Mean is increasing, and that Domain holds the
// suite's labels and, for ZeroOne, nothing else.
func TestLossMeanDomain(t *testing.T) {
	for _, tc := range lossSuite {
		t.Run(tc.loss.Name(), func(t *testing.T) {
			prev := math.Inf(-1)
			for _, eta := range etaGrid {
				mu := tc.loss.Mean(eta)
				if d := tc.loss.Deriv(mu, eta); math.Abs(d) > 1e-12*(1+math.Abs(mu)) {
					t.Errorf("η=%v: Deriv(Mean(η), η) = %v, want 0", eta, d)
				}
				if !(mu >= prev) {
					t.Errorf("η=%v: Mean %v not increasing (previous %v)", eta, mu, prev)
				}
				prev = mu
			}
			dom := tc.loss.Domain()
			for _, y := range tc.labels {
				if !dom.Contains(y) {
					t.Errorf("Domain %v does not contain label %v", dom, y)
				}
			}
			for _, y := range []float64{-1, 0.5, 2} {
				if got := dom.Contains(y); got != (dom != ZeroOne) {
					t.Errorf("Domain %v contains %v: %v", dom, y, got)
				}
			}
		})
	}
}
