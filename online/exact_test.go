package online

import (
	"math"
	"testing"

	"pgregory.net/rapid"
)

// TestOptimumProperty checks on randomized problems (pgregory.net/rapid
// v1.3.0), for both losses, weights and three penalty mixes, that
// Ladder.Optimum and Ladder.OptimumPath reach the KKT conditions of the elastic net to 1e-6
// (Hastie, Tibshirani & Wainwright 2015, ch. 2 and 5) from a member that
// has taken only the streaming steps, that it leaves the ladder unchanged,
// and that its support and coefficients match the existing batch solver
// (Converge to 1e-9 on a copy of the ladder with λ fixed at the member's
// λ): the optimum of a strictly convex objective is unique, so two
// solvers at these tolerances agree to about 1e-4 relative
// (common practice, no single source). The KKT it reports is recomputed
// independently by Ladder.KKT on the fixed-λ ladder set to the result.
func TestOptimumProperty(t *testing.T) {
	rapid.Check(t, func(t *rapid.T) {
		l, o, p, n := drawLadder(t, 30, 120, 10, 0.05)
		state, _ := l.MarshalBinary()
		path := l.OptimumPath(nil, nil)
		for i := range l.Size() {
			opt := l.Optimum(i, nil, nil)
			if !opt.Converged || opt.KKT > DefaultKKT {
				t.Fatalf("member %d: KKT %g after %d passes", i, opt.KKT, opt.Passes)
			}
			if p := path[i]; !p.Converged || relDist(p.Model.Standardized, opt.Model.Standardized) > 1e-6 || math.Abs(p.Model.StdIntercept-opt.Model.StdIntercept) > 1e-6 {
				t.Fatalf("member %d: OptimumPath %v (KKT %g), Optimum %v", i, p.Model.Standardized, p.KKT, opt.Model.Standardized)
			}
			ref := *o
			ref.Lambda, ref.Size = l.Lambda(i), 1
			r, err := NewLadder(&ref)
			if err != nil {
				t.Fatal(err)
			}
			feed(t, r, p, 0, n)
			if !r.Converge(1e-9, 600) {
				t.Skipf("reference did not converge (member %d)", i)
			}
			want := r.Model(0)
			for j := range o.Features {
				a, b := opt.Model.Standardized[j], want.Standardized[j]
				if (a == 0) != (b == 0) && math.Abs(a-b) > 1e-7 {
					t.Fatalf("member %d feature %d: support differs: %g vs batch %g", i, j, a, b)
				}
				if math.Abs(a-b) > 1e-4*(1+math.Abs(b)) {
					t.Fatalf("member %d feature %d: %g vs batch %g", i, j, a, b)
				}
			}
			// Independent KKT: put the result into the reference ladder.
			m := r.lrn.(*sagaLearner).ms[0]
			m.b = opt.Model.StdIntercept
			copy(m.theta, opt.Model.Standardized)
			if v := r.KKT(0); v > 2*DefaultKKT {
				t.Fatalf("member %d: Ladder.KKT of the optimum %g (reported %g)", i, v, opt.KKT)
			}
		}
		if again, _ := l.MarshalBinary(); string(again) != string(state) {
			t.Fatal("Optimum changed the ladder")
		}
	})
}

// TestOptimumWarmStart checks that a start from a previous optimum (the
// window then moved by 5 %) reaches the same optimum as a start from the
// streaming member: the same support and coefficients within 1e-6 (a
// constructed problem, makeProblem; uniqueness of the strictly convex
// optimum, common practice, no single source). The passes are logged: the
// member, whose support is a superset, measured 3 passes here against 5
// from the previous optimum, which is why the pipeline starts from it.
func TestOptimumWarmStart(t *testing.T) {
	const n, d = 2000, 20
	p := makeProblem(3, n+100, d, 5, false, false)
	l, err := NewLadder(&Options{Features: d, Window: n, Size: 8, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, n)
	prev := l.Optimum(5, nil, nil)
	feed(t, l, p, n, n+100)
	cold := l.Optimum(5, nil, nil)
	warm := l.Optimum(5, &prev.Model, nil)
	if !cold.Converged || !warm.Converged {
		t.Fatalf("KKT cold %g warm %g", cold.KKT, warm.KKT)
	}
	for j := range d {
		a, b := cold.Model.Standardized[j], warm.Model.Standardized[j]
		if (a == 0) != (b == 0) || math.Abs(a-b) > 1e-6 {
			t.Errorf("feature %d: %g from the member, %g from the previous optimum", j, a, b)
		}
	}
	t.Logf("passes: from the member %d, from the previous optimum %d", cold.Passes, warm.Passes)
}

// TestOptimumDerivs checks the fused loss derivatives of the exact fit
// against the Loss methods (the stable forms of Loss, to 1e-15 relative;
// common practice, no single source).
func TestOptimumDerivs(t *testing.T) {
	for _, loss := range []Loss{Squared{}, Logistic{}} {
		l, err := NewLadder(&Options{Features: 1, Loss: loss})
		if err != nil {
			t.Fatal(err)
		}
		e := &exact{s: l.lrn.(*sagaLearner)}
		for _, eta := range []float64{-40, -3, -1e-3, 0, 0.5, 7, 40} {
			for _, y := range []float64{0, 1} {
				v, d1, d2 := e.derivs(y, eta)
				want := [3]float64{loss.Value(y, eta), loss.Deriv(y, eta), loss.SecondDeriv(y, eta)}
				for k, got := range [3]float64{v, d1, d2} {
					if math.Abs(got-want[k]) > 1e-15*(1+math.Abs(want[k])) {
						t.Errorf("%s y=%g η=%g: derivative %d is %g, Loss says %g", loss.Name(), y, eta, k, got, want[k])
					}
				}
			}
		}
	}
}
