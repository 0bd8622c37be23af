package online

import (
	"testing"

	"gonum.org/v1/gonum/mat"
)

// fit returns a converged ladder on records [0, n) of p.
func fit(t *testing.T, p problem, n int, o Options) *Ladder {
	t.Helper()
	return fitTol(t, p, n, o, 1e-9)
}

// fitTol is fit with KKT tolerance tol.
func fitTol(t *testing.T, p problem, n int, o Options, tol float64) *Ladder {
	t.Helper()
	o.Features, o.Window = len(p.x[0]), n
	l, err := NewLadder(&o)
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, n)
	if !l.Converge(tol, 100) {
		t.Fatalf("not converged: KKT %g", l.KKT(l.Size()-1))
	}
	return l
}

// ols returns the unpenalized least-squares θ on the standardized records
// (gonum/mat v0.17.0 QR solve).
func ols(t *testing.T, p problem, n int) []float64 {
	t.Helper()
	xs, yc, _ := standardize(p, 0, n)
	var th mat.VecDense
	if err := th.SolveVec(xs, mat.NewVecDense(n, yc)); err != nil {
		t.Fatal(err)
	}
	return th.RawVector().Data
}

// TestLambdaMaxZero: for λ ≥ λ_max every lasso and elastic-net coefficient
// is zero, and just below λ_max one is not (Friedman, Hastie & Tibshirani
// 2010, §2.5: λ_max is the smallest λ with θ = 0).
func TestLambdaMaxZero(t *testing.T) {
	for _, mix := range []float64{1, 0.5} {
		for _, logistic := range []bool{false, true} {
			p := makeProblem(21, 150, 8, 3, logistic, true)
			var loss Loss = Squared{}
			if logistic {
				loss = Logistic{}
			}
			pen := Penalty{Mix: mix}
			l := fit(t, p, 150, Options{Loss: loss, Penalty: &pen, Size: 2})
			lmax := l.LambdaMax()
			if l.Nonzero(0) != 0 {
				t.Errorf("mix %v logistic %v: member 0 at λ_max has %d nonzero", mix, logistic, l.Nonzero(0))
			}
			for _, f := range []float64{1.0001, 2} {
				lf := fit(t, p, 150, Options{Loss: loss, Penalty: &pen, Lambda: f * lmax})
				if lf.Nonzero(0) != 0 {
					t.Errorf("λ = %v·λ_max: %d nonzero", f, lf.Nonzero(0))
				}
			}
			if lf := fit(t, p, 150, Options{Loss: loss, Penalty: &pen, Lambda: 0.99 * lmax}); lf.Nonzero(0) == 0 {
				t.Errorf("λ = 0.99·λ_max: all zero")
			}
		}
	}
}

// TestLadderDensity: the smallest λ is at least as dense as the largest and
// the nonzero count never falls by more than one between neighbours
// (lasso paths are not strictly monotone; Tibshirani 1996, Efron et al.
// 2004 for the path; the first-vs-last comparison is the fact checked).
func TestLadderDensity(t *testing.T) {
	p := makeProblem(8, 300, 20, 5, false, false)
	l := fit(t, p, 300, Options{})
	first, last := l.Nonzero(0), l.Nonzero(l.Size()-1)
	if first > last || last < 5 {
		t.Errorf("nonzero first %d last %d", first, last)
	}
	for i := 1; i < l.Size(); i++ {
		if l.Lambda(i) >= l.Lambda(i-1) {
			t.Fatalf("λ not decreasing at %d", i)
		}
	}
}

// TestRidgeShrinks: ridge shrinks the coefficient vector toward zero
// relative to OLS, sets none exactly to zero, and each member's norm grows
// as λ falls (Hoerl & Kennard 1970; ESL §3.4.1).
func TestRidgeShrinks(t *testing.T) {
	p := makeProblem(4, 120, 6, 6, false, false)
	beta := ols(t, p, 120)
	l := fit(t, p, 120, Options{Penalty: &Penalty{Mix: 0}, Size: 5})
	prev := 0.0
	for i := range l.Size() {
		m := l.Model(i)
		if m.Nonzero() != 6 {
			t.Errorf("member %d: %d nonzero, want 6", i, m.Nonzero())
		}
		norm := mat.Norm(mat.NewVecDense(6, m.Standardized), 2)
		if norm >= mat.Norm(mat.NewVecDense(6, beta), 2) || norm <= prev {
			t.Errorf("member %d: ‖θ‖ %v not shrunk (OLS %v, previous %v)", i, norm, mat.Norm(mat.NewVecDense(6, beta), 2), prev)
		}
		prev = norm
	}
}

// TestCorrelatedPair: with two strongly correlated informative features the
// lasso keeps fewer of them than ridge, which spreads weight over both
// (Zou & Hastie 2005, §2.3, the grouping effect).
func TestCorrelatedPair(t *testing.T) {
	p := makeProblem(6, 200, 4, 0, false, false)
	for i := range p.x {
		z := p.x[i][3]
		p.x[i][0] = z + 0.1*p.x[i][2] // features 0 and 1: correlation ≈ 0.98
		p.x[i][1] = z - 0.1*p.x[i][2]
		p.y[i] = 0.7*p.x[i][0] + 0.3*p.x[i][1]
	}
	lam := 0.05
	lasso := fitTol(t, p, 200, Options{Lambda: lam}, 1e-7)
	ridge := fitTol(t, p, 200, Options{Lambda: lam, Penalty: &Penalty{Mix: 0}}, 1e-7)
	count := func(l *Ladder) int {
		m := l.Model(0)
		n := 0
		for _, v := range m.Standardized[:2] {
			if v != 0 {
				n++
			}
		}
		return n
	}
	if cl, cr := count(lasso), count(ridge); cl >= cr {
		t.Errorf("of the pair, lasso keeps %d, ridge %d", cl, cr)
	}
}

// TestSmallLambdaIsOLS: a tiny λ reproduces the unpenalized least-squares
// fit computed with gonum/mat v0.17.0 (the penalty vanishes; ESL §3.2).
func TestSmallLambdaIsOLS(t *testing.T) {
	p := makeProblem(9, 150, 5, 5, false, false)
	beta := ols(t, p, 150)
	for _, mix := range []float64{1, 0} {
		l := fit(t, p, 150, Options{Lambda: 1e-10, Penalty: &Penalty{Mix: mix}})
		if e := relErr(l.Model(0).Standardized, beta); e > 1e-6 {
			t.Errorf("mix %v: rel err vs OLS %g", mix, e)
		}
	}
}
