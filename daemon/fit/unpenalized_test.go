package fit

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// relDiff returns ‖a − b‖₂ / ‖b‖₂.
func relDiff(a, b []float64) float64 {
	var num, den float64
	for i := range a {
		num += (a[i] - b[i]) * (a[i] - b[i])
		den += b[i] * b[i]
	}
	return math.Sqrt(num / den)
}

// design returns [1, x] of every row of the CSV at path.
func design(t *testing.T, path, label string, logistic bool) (*mat.Dense, []float64, []string) {
	t.Helper()
	tb, err := readTable(path, label, logistic)
	if err != nil {
		t.Fatal(err)
	}
	n, d := tb.rows(), len(tb.names)
	a := mat.NewDense(n, d+1, nil)
	for i := range n {
		a.Set(i, 0, 1)
		for j, v := range tb.row(i) {
			a.Set(i, j+1, v)
		}
	}
	return a, append([]float64(nil), tb.y...), tb.names
}

// fitted returns the intercept and the raw coefficients of d in the
// order of names.
func fitted(d *fitDoc, names []string) []float64 {
	out := []float64{d.Intercept}
	for _, name := range names {
		out = append(out, d.Coefficients[name])
	}
	return out
}

// TestUnpenalizedOLS: lariat fit --lambda 0 on the diabetes data (Efron et
// al. 2004) is ordinary least squares: the intercept and raw coefficients
// equal the least-squares solution of [1, X]β ≈ y from gonum/mat v0.17.0
// (QR, Dense.Solve on a tall matrix) to 1e-6 relative.
func TestUnpenalizedOLS(t *testing.T) {
	const path = "../../testdata/diabetes.csv"
	a, y, names := design(t, path, "progression", false)
	var beta mat.VecDense
	if err := beta.SolveVec(a, mat.NewVecDense(len(y), y)); err != nil {
		t.Fatal(err)
	}
	d := fitJSON(t, Options{Input: path, Label: "progression", Lambda: new(0.0)})
	if !d.Converged || !d.Unpenalized || d.Penalty.Lambda != 0 || d.Nonzero != 10 {
		t.Fatalf("converged %v unpenalized %v λ %g nonzero %d", d.Converged, d.Unpenalized, d.Penalty.Lambda, d.Nonzero)
	}
	if e := relDiff(fitted(d, names), beta.RawVector().Data); e > 1e-6 {
		t.Errorf("relative difference from least squares %.3g > 1e-6", e)
	} else {
		t.Logf("relative difference from least squares %.3g", e)
	}
}

// TestUnpenalizedLogistic: lariat fit --loss logistic --lambda 0 on the
// invented pump data (testdata/make_demo_pump.go; its classes overlap)
// equals the maximum-likelihood fit by iteratively reweighted least squares
// (Newton's method on the log-likelihood, McCullagh & Nelder 1989,
// Generalized Linear Models, 2nd ed., §4.4) written here with gonum/mat
// v0.17.0, to 1e-6 relative.
func TestUnpenalizedLogistic(t *testing.T) {
	const path = "../../testdata/demo-pump.csv"
	a, y, names := design(t, path, "trip", true)
	n, p := a.Dims()
	beta := mat.NewVecDense(p, nil)
	for range 50 {
		var eta mat.VecDense
		eta.MulVec(a, beta)
		var h mat.Dense
		g := mat.NewVecDense(p, nil)
		w := mat.NewDense(n, p, nil)
		for i := range n {
			pr := 1 / (1 + math.Exp(-eta.AtVec(i)))
			for j := range p {
				w.Set(i, j, pr*(1-pr)*a.At(i, j))
				g.SetVec(j, g.AtVec(j)+(y[i]-pr)*a.At(i, j))
			}
		}
		h.Mul(a.T(), w)
		var step mat.VecDense
		if err := step.SolveVec(&h, g); err != nil {
			t.Fatal(err)
		}
		beta.AddVec(beta, &step)
		if mat.Norm(&step, math.Inf(1)) < 1e-13*(1+mat.Norm(beta, math.Inf(1))) {
			break
		}
	}
	d := fitJSON(t, Options{Input: path, Label: "trip", Loss: "logistic", Lambda: new(0.0)})
	if !d.Converged {
		t.Fatalf("not converged: KKT %g", d.KKT)
	}
	if e := relDiff(fitted(d, names), beta.RawVector().Data); e > 1e-6 {
		t.Errorf("relative difference from IRLS %.3g > 1e-6", e)
	} else {
		t.Logf("relative difference from IRLS %.3g", e)
	}
}

// randomCSV returns a CSV of n rows of d standard normal features x00.. and
// a label y (0/1 by the sign of x00 when separable, else Gaussian).
func randomCSV(t *testing.T, n, d int, separable bool) string {
	r := rand.New(rand.NewPCG(uint64(n*d), 3))
	var b strings.Builder
	for j := range d {
		fmt.Fprintf(&b, "x%02d,", j)
	}
	b.WriteString("y\n")
	for range n {
		x0 := r.NormFloat64()
		fmt.Fprintf(&b, "%.17g,", x0)
		for range d - 1 {
			fmt.Fprintf(&b, "%.17g,", r.NormFloat64())
		}
		y := x0 + r.NormFloat64()
		if separable {
			y = 0
			if x0 > 0 {
				y = 1
			}
		}
		fmt.Fprintf(&b, "%g\n", y)
	}
	return b.String()
}

// TestUnpenalizedRefused: where the unpenalized fit is not unique lariat
// fit --lambda 0 says why, in one line, and writes nothing. The conditions:
// a least-squares solution is unique iff the centered design has full
// column rank (any linear-algebra text), which n rows cannot give to more
// than n − 1 varying features; the logistic maximum exists iff the classes
// are not separated (Albert & Anderson 1984).
func TestUnpenalizedRefused(t *testing.T) {
	for _, tc := range []struct {
		name, csv, loss, want string
	}{
		{"d > n", randomCSV(t, 6, 8, false), "", "8 features vary but there are only 6 rows (at most 5 independent directions)"},
		{"d = n", randomCSV(t, 8, 8, false), "", "8 features vary but there are only 8 rows"},
		{"collinear", "a,b,c,y\n1,2,3,1\n2,4,1,3\n3,6,4,2\n4,8,1,5\n5,10,9,4\n", "", "the features are collinear (rank 2 for 3 varying features)"},
		{"separable", randomCSV(t, 60, 3, true), "logistic", "separates the two classes"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var out bytes.Buffer
			err := Run(&out, Options{Input: writeCSV(t, tc.csv), Label: "y", Loss: tc.loss, Lambda: new(0.0)})
			if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") || out.Len() > 0 {
				t.Errorf("err = %v, output %q; want one line containing %q", err, out.String(), tc.want)
			}
		})
	}
}
