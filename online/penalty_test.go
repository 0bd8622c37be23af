package online

import (
	"math"
	"testing"
)

// penaltySuite lists every penalty kind checked by the shared suite.
var penaltySuite = []Penalty{Lasso(), Ridge(), ElasticNet(0.3), ElasticNet(0.7)}

// TestPenaltyProx checks Prox against brute-force minimization of
// ½(u − z)² + t(α|u| + (1−α)/2 u²) on a grid of step 1e-4 (Parikh & Boyd
// 2014, §6.5.2 for the closed form being checked).
func TestPenaltyProx(t *testing.T) {
	for _, p := range penaltySuite {
		t.Run(p.Kind()+"/"+ftoa(p.Mix), func(t *testing.T) {
			for _, z := range []float64{-3, -1.2, -0.4, -0.05, 0, 0.1, 0.5, 2.5} {
				for _, tt := range []float64{0, 0.2, 1} {
					obj := func(u float64) float64 {
						return 0.5*(u-z)*(u-z) + tt*(p.Mix*math.Abs(u)+(1-p.Mix)/2*u*u)
					}
					best, arg := math.Inf(1), 0.0
					for u := -4.0; u <= 4; u += 1e-4 {
						if v := obj(u); v < best {
							best, arg = v, u
						}
					}
					got := p.Prox(z, tt)
					if math.Abs(got-arg) > 2e-4 || obj(got) > best+1e-12 {
						t.Errorf("z=%v t=%v: Prox %v (obj %v), grid %v (obj %v)", z, tt, got, obj(got), arg, best)
					}
				}
			}
		})
	}
}

// TestPenaltyValueKind checks Value on a fixed vector and the kind names.
// Source: the elastic-net penalty λ(α‖θ‖₁ + (1−α)/2 ‖θ‖²) in the
// parametrization of Friedman, Hastie & Tibshirani (2010), "Regularization
// paths for generalized linear models via coordinate descent", Journal of
// Statistical Software 33 (value from memory), evaluated by hand for
// θ = (1, −2, 0): ‖θ‖₁ = 3 and ‖θ‖² = 5.
func TestPenaltyValueKind(t *testing.T) {
	th := []float64{1, -2, 0}
	for _, tc := range []struct {
		p    Penalty
		kind string
		want float64 // λ = 2: 2(α·3 + (1−α)/2·5)
	}{
		{Lasso(), "lasso", 6},
		{Ridge(), "ridge", 5},
		{ElasticNet(0.3), "elastic-net", 2 * (0.9 + 0.35*5)},
	} {
		if got := tc.p.Value(th, 2); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("%s: Value %v, want %v", tc.kind, got, tc.want)
		}
		if tc.p.Kind() != tc.kind {
			t.Errorf("Kind %q, want %q", tc.p.Kind(), tc.kind)
		}
	}
}

func ftoa(v float64) string { return strconvFloat(v) }
