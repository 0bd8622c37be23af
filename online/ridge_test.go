package online

import (
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestRidgeClosedForm checks a converged ridge fit against the closed form
// θ = (X̃ᵀX̃ + nλI)⁻¹X̃ᵀ(y − ȳ), b = ȳ, solved with gonum/mat v0.17.0
// (Hoerl & Kennard 1970, in the 1/(2n) convention of Friedman, Hastie &
// Tibshirani 2010), including d > n.
func TestRidgeClosedForm(t *testing.T) {
	for _, tc := range []struct {
		name   string
		n, d   int
		lambda float64
	}{
		{"n>d", 200, 10, 0.1},
		{"n<d", 30, 60, 0.05},
		{"tiny-lambda", 100, 5, 1e-4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := makeProblem(3, tc.n, tc.d, 4, false, false)
			l, err := NewLadder(&Options{Features: tc.d, Penalty: &Penalty{Mix: 0}, Lambda: tc.lambda, Window: tc.n, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			feed(t, l, p, 0, tc.n)
			if !l.Converge(1e-10, 50) {
				t.Fatalf("not converged: KKT %g", l.KKT(0))
			}
			xs, yc, ybar := standardize(p, 0, tc.n)
			var a mat.Dense
			a.Mul(xs.T(), xs)
			for j := range tc.d {
				a.Set(j, j, a.At(j, j)+float64(tc.n)*tc.lambda)
			}
			var rhs, th mat.VecDense
			rhs.MulVec(xs.T(), mat.NewVecDense(tc.n, yc))
			if err := th.SolveVec(&a, &rhs); err != nil {
				t.Fatal(err)
			}
			m := l.Model(0)
			if e := relErr(m.Standardized, th.RawVector().Data); e > 1e-6 {
				t.Errorf("θ rel err %g", e)
			}
			if e := relErr([]float64{m.StdIntercept}, []float64{ybar}); e > 1e-6 {
				t.Errorf("b = %v, want ȳ = %v", m.StdIntercept, ybar)
			}
		})
	}
}
