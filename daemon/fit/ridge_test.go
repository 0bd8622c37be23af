package fit

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// split is a CSV table cut as lariat fit cuts it: row i is held out when
// i % 5 == 4 (window.Splitter's sequence rule, every 5th row).
type split struct {
	xTrain, xHold [][]float64
	yTrain, yHold []float64
}

func splitRows(x [][]float64, y []float64) split {
	var s split
	for i := range y {
		if i%5 == 4 {
			s.xHold, s.yHold = append(s.xHold, x[i]), append(s.yHold, y[i])
		} else {
			s.xTrain, s.yTrain = append(s.xTrain, x[i]), append(s.yTrain, y[i])
		}
	}
	return s
}

// ridgeHeldOut returns the held-out loss mean ½(y − ŷ)² of ridge at λ fitted
// on the training rows in closed form: features standardized with the
// training mean and population std, θ = (X̃ᵀX̃ + nλI)⁻¹X̃ᵀ(y − ȳ), b = ȳ
// (Hoerl & Kennard 1970, in the 1/(2n) convention of Friedman, Hastie &
// Tibshirani 2010; λ = 0 is least squares), solved with gonum/mat v0.17.0.
func (s split) ridgeHeldOut(t *testing.T, lambda float64) float64 {
	t.Helper()
	n, d := len(s.yTrain), len(s.xTrain[0])
	mu, sd := make([]float64, d), make([]float64, d)
	for j := range d {
		for _, x := range s.xTrain {
			mu[j] += x[j] / float64(n)
		}
		for _, x := range s.xTrain {
			sd[j] += (x[j] - mu[j]) * (x[j] - mu[j]) / float64(n)
		}
		sd[j] = math.Sqrt(sd[j])
	}
	var ybar float64
	for _, y := range s.yTrain {
		ybar += y / float64(n)
	}
	xs := mat.NewDense(n, d, nil)
	yc := mat.NewVecDense(n, nil)
	for i, x := range s.xTrain {
		for j := range d {
			xs.Set(i, j, (x[j]-mu[j])/sd[j])
		}
		yc.SetVec(i, s.yTrain[i]-ybar)
	}
	var a mat.Dense
	a.Mul(xs.T(), xs)
	for j := range d {
		a.Set(j, j, a.At(j, j)+float64(n)*lambda)
	}
	var rhs, th mat.VecDense
	rhs.MulVec(xs.T(), yc)
	if err := th.SolveVec(&a, &rhs); err != nil {
		t.Fatal(err)
	}
	var loss float64
	for i, x := range s.xHold {
		eta := ybar
		for j := range d {
			eta += th.AtVec(j) * (x[j] - mu[j]) / sd[j]
		}
		r := s.yHold[i] - eta
		loss += 0.5 * r * r / float64(len(s.yHold))
	}
	return loss
}

// gridBest returns the lowest held-out loss of ridge over a fine grid,
// λ = 10^(k/50) for k = −500..250 (λ from 1e-10 to 1e5) and λ = 0, and the
// λ that reaches it.
func (s split) gridBest(t *testing.T) (loss, lambda float64) {
	loss, lambda = s.ridgeHeldOut(t, 0), 0
	for k := -500; k <= 250; k++ {
		lam := math.Pow(10, float64(k)/50)
		if l := s.ridgeHeldOut(t, lam); l < loss {
			loss, lambda = l, lam
		}
	}
	return loss, lambda
}

// readXY reads a CSV of numeric columns, the label named label.
func readXY(t *testing.T, path, label string) ([][]float64, []float64) {
	t.Helper()
	tb, err := readTable(path, label, false)
	if err != nil {
		t.Fatal(err)
	}
	x := make([][]float64, tb.rows())
	for i := range x {
		x[i] = append([]float64(nil), tb.row(i)...)
	}
	return x, append([]float64(nil), tb.y...)
}

// TestRidgeChoosesOnDiabetes: lariat fit --penalty ridge --rule min on the
// diabetes data (Efron, Hastie, Johnstone & Tibshirani 2004, "Least angle
// regression", Ann. Statist. 32(2)) picks a λ whose held-out loss on the
// every-5th split is within 2 % of the best ridge λ on a fine grid computed
// in closed form with gonum (split.gridBest). On this split the best is at
// or near λ = 0, below the df-anchored grid's bottom, so the ladder must
// have extended down to reach it; the loss the ladder reports for its
// choice must be the closed form's at that λ.
func TestRidgeChoosesOnDiabetes(t *testing.T) {
	const path = "../../testdata/diabetes.csv"
	d := fitJSON(t, Options{Input: path, Label: "progression", Penalty: "ridge", Rule: "min", Ladder: true})
	sel := d.Selection
	if sel == nil || sel.Grid == nil || sel.Grid.Anchor != "df" {
		t.Fatalf("selection %+v; want a df-anchored grid", sel)
	}
	s := splitRows(readXY(t, path, "progression"))
	best, bestLambda := s.gridBest(t)
	got := s.ridgeHeldOut(t, sel.Lambda)
	t.Logf("chosen λ %.3g (grid extended %d of %d): held-out loss %.6g; fine-grid best %.6g at λ %.3g",
		sel.Lambda, sel.Grid.Extended, sel.Grid.MaxExtended, got, best, bestLambda)
	if got > 1.02*best {
		t.Errorf("held-out loss %.6g at the chosen λ %.3g, more than 2 %% above the best %.6g (λ %.3g)", got, sel.Lambda, best, bestLambda)
	}
	if math.Abs(sel.Loss-got) > 1e-6*got {
		t.Errorf("ladder reports held-out loss %.9g at λ %.3g, closed form %.9g", sel.Loss, sel.Lambda, got)
	}
	if sel.Grid.Extended == 0 || !(sel.Lambda < float64(sel.Grid.Bottom)) {
		t.Errorf("grid not extended (%d) or λ %g not below its anchored bottom %g", sel.Grid.Extended, sel.Lambda, float64(sel.Grid.Bottom))
	}
}

// equicorrelated writes n rows of d features x ~ N(0, Σ), Σ = (1−ρ)I + ρ11ᵀ
// (the equicorrelated Gaussian design, x_j = √ρ·z₀ + √(1−ρ)·z_j), with
// y = Σ_j β_j x_j + σ·ε, β_j = 1/√d for every j (a dense, small effect per
// feature) and standard normal z, ε from PCG(seed, 1).
func equicorrelated(t *testing.T, seed uint64, n, d int, rho, sigma float64) string {
	r := rand.New(rand.NewPCG(seed, 1))
	var b strings.Builder
	for j := range d {
		fmt.Fprintf(&b, "x%02d,", j)
	}
	b.WriteString("y\n")
	for range n {
		z0 := r.NormFloat64()
		var y float64
		for range d {
			x := math.Sqrt(rho)*z0 + math.Sqrt(1-rho)*r.NormFloat64()
			y += x / math.Sqrt(float64(d))
			fmt.Fprintf(&b, "%.17g,", x)
		}
		fmt.Fprintf(&b, "%.17g\n", y+sigma*r.NormFloat64())
	}
	return writeCSV(t, b.String())
}

// TestRidgeChoosesInterior: on a generated problem where ridge's best λ is
// interior (many correlated features, few rows: equicorrelated design,
// d = 40, ρ = 0.8, n = 100, σ = 3), lariat fit --penalty ridge --rule min
// chooses a member strictly inside the ladder, the grid is not extended, and
// its held-out loss is within 2 % of the best of the fine closed-form grid.
func TestRidgeChoosesInterior(t *testing.T) {
	path := equicorrelated(t, 7, 100, 40, 0.8, 3)
	d := fitJSON(t, Options{Input: path, Label: "y", Penalty: "ridge", Rule: "min", Ladder: true})
	sel := d.Selection
	s := splitRows(readXY(t, path, "y"))
	best, bestLambda := s.gridBest(t)
	got := s.ridgeHeldOut(t, sel.Lambda)
	t.Logf("chosen member %d, λ %.3g: held-out loss %.6g; fine-grid best %.6g at λ %.3g; grid %+v",
		sel.Index, sel.Lambda, got, best, bestLambda, *sel.Grid)
	if sel.Index <= 0 || sel.Index >= len(d.Ladder)-1 || sel.Grid.Extended != 0 {
		t.Errorf("chosen member %d of %d (extended %d); want an interior member of the anchored grid", sel.Index, len(d.Ladder), sel.Grid.Extended)
	}
	if !(bestLambda > float64(sel.Grid.Bottom) && bestLambda < float64(sel.Grid.Top)) {
		t.Errorf("the fine grid's best λ %.3g is outside the ladder [%.3g, %.3g]", bestLambda, float64(sel.Grid.Bottom), float64(sel.Grid.Top))
	}
	if got > 1.02*best {
		t.Errorf("held-out loss %.6g at the chosen λ %.3g, more than 2 %% above the best %.6g (λ %.3g)", got, sel.Lambda, best, bestLambda)
	}
}
