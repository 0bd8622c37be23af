package online

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// hatTrace returns df(λ) = tr[X̃(X̃ᵀX̃ + nλI)⁻¹X̃ᵀ] = tr[(C + λI)⁻¹C],
// C = X̃ᵀX̃/n, by a linear solve (no eigenvalues): the effective degrees of
// freedom of ridge (Hastie, Tibshirani & Friedman 2009, The Elements of
// Statistical Learning, 2nd ed., §3.4.1, eq. 3.50), computed with
// gonum/mat v0.17.0.
func hatTrace(t *testing.T, xs *mat.Dense, lambda float64) float64 {
	t.Helper()
	n, d := xs.Dims()
	var c mat.Dense
	c.Mul(xs.T(), xs)
	c.Scale(1/float64(n), &c)
	var a mat.Dense
	a.CloneFrom(&c)
	for j := range d {
		a.Set(j, j, a.At(j, j)+lambda)
	}
	var z mat.Dense
	if err := z.Solve(&a, &c); err != nil {
		t.Fatal(err)
	}
	return mat.Trace(&z)
}

// TestRidgeGridDF checks the ridge grid's anchor: member 0's λ gives
// df = 0.5 and member K−1's df = rank − 0.5, df computed independently of
// the ladder's eigenvalues by the hat-matrix trace (hatTrace), and the
// rank is that of the design: d, n − 1 when d ≥ n (centering removes one
// direction), d − 1 with a column that repeats another in other units.
func TestRidgeGridDF(t *testing.T) {
	for _, tc := range []struct {
		name     string
		n, d     int
		collide  bool // feature d−1 is 2·feature 0 + 1
		wantRank int
	}{
		{"n>d", 300, 10, false, 10},
		{"d>n", 30, 60, false, 29},
		{"collinear", 200, 6, true, 5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := makeProblem(21, tc.n, tc.d, 3, false, false)
			if tc.collide {
				for _, x := range p.x {
					x[tc.d-1] = 2*x[0] + 1
				}
			}
			ridge := Ridge()
			l, err := NewLadder(&Options{Features: tc.d, Window: tc.n, Penalty: &ridge, Seed: 2})
			if err != nil {
				t.Fatal(err)
			}
			feed(t, l, p, 0, tc.n)
			l.Converge(1e-3, 1) // anchors the grid on the whole window
			g := l.Grid()
			if g.Anchor != AnchorDF || g.Rank != tc.wantRank || g.Extended != 0 {
				t.Fatalf("grid %+v; want anchor df, rank %d, not extended", g, tc.wantRank)
			}
			if want := [2]float64{0.5, float64(tc.wantRank) - 0.5}; g.DF != want {
				t.Errorf("df targets %v, want %v", g.DF, want)
			}
			if r := Rank(l.Spectrum()); r != tc.wantRank {
				t.Errorf("Rank(Spectrum()) = %d, want %d", r, tc.wantRank)
			}
			xs, _, _ := standardize(p, 0, tc.n)
			for i, lam := range []float64{g.Top, g.Bottom} {
				if got := hatTrace(t, xs, lam); math.Abs(got-g.DF[i]) > 1e-6 {
					t.Errorf("df(%g) = %.9f by the hat-matrix trace, grid says %v", lam, got, g.DF[i])
				}
			}
			if K := l.Size(); math.Abs(l.Lambda(0)-g.Top) > 1e-12*g.Top || math.Abs(l.Lambda(K-1)-g.Bottom) > 1e-12*g.Bottom {
				t.Errorf("members span [%g, %g], grid [%g, %g]", l.Lambda(0), l.Lambda(K-1), g.Top, g.Bottom)
			}
		})
	}
}

// TestExtend drives Ladder.Extend through its rule (see its doc): down by
// K/4 when the held-out minimum is the last member and the chosen member
// stays on the ladder, back up when both sit in the first K/4, never past
// six decades below the anchored bottom, never for a lasso whose window
// holds no more records than features, and each move re-seats the members
// as warm copies (member i after a move down is the old member i+3).
// Source: the rule stated in the README ("How λ is chosen"), no external
// source.
func TestExtend(t *testing.T) {
	p := makeProblem(22, 200, 5, 3, false, false)
	l, _ := NewLadder(&Options{Features: 5, Window: 200, Seed: 3})
	feed(t, l, p, 0, 200)
	g0 := l.Grid()
	if g0.Anchor != AnchorLambdaMax || g0.MaxExtended != 22 || l.ExtendStep() != 3 {
		t.Fatalf("grid %+v step %d; want lambda_max, max 22 (11·ln 1e-6/ln 1e-3), step 3", g0, l.ExtendStep())
	}
	for _, st := range []struct {
		best, chosen, want, ext int
	}{
		{5, 5, 0, 0},   // interior minimum
		{11, 2, 0, 0},  // the chosen member would fall off
		{11, 11, 3, 3}, // down
		{11, 3, 3, 6},  // down (chosen 3 stays at 0)
		{1, 4, 0, 6},   // chosen not near the top
		{2, 0, -3, 3},  // up
		{0, 0, -3, 0},  // up to the anchored grid
		{0, 0, 0, 0},   // not extended: nothing to undo
		{-1, -1, 0, 0}, // no scores
		{11, -1, 0, 0}, // no choice yet
		{11, 11, 3, 3}, // down again
		{11, 10, 3, 6}, // and again
	} {
		_, before := l.members[min(11, st.want+5)].params()
		old := append([]float64(nil), before...)
		if k := l.Extend(st.best, st.chosen); k != st.want || l.Grid().Extended != st.ext {
			t.Fatalf("Extend(%d, %d) = %d, extended %d; want %d, %d", st.best, st.chosen, k, l.Grid().Extended, st.want, st.ext)
		}
		if st.want > 0 {
			if _, th := l.members[5].params(); relErr(th, old) != 0 {
				t.Errorf("after a move by %d member 5 is not the old member %d", st.want, st.want+5)
			}
		}
		g := l.Grid()
		for i := range l.Size() {
			want := g.Top * math.Pow(g.Bottom/g.Top, float64(i+g.Extended)/11)
			if math.Abs(l.Lambda(i)-want) > 1e-12*want {
				t.Fatalf("λ_%d = %g, want %g", i, l.Lambda(i), want)
			}
		}
	}
	for l.Extend(11, 11) > 0 {
	}
	g := l.Grid()
	if g.Extended != 22 || l.Lambda(11) < 1e-6*g.Bottom*(1-1e-9) {
		t.Errorf("extended %d, smallest λ %g; want 22 and >= 1e-6·%g", g.Extended, l.Lambda(11), g.Bottom)
	}

	wide := makeProblem(23, 8, 10, 3, false, false) // lasso with more features than records
	lw, _ := NewLadder(&Options{Features: 10, Window: 8})
	feed(t, lw, wide, 0, 8)
	fixed, _ := NewLadder(&Options{Features: 5, Window: 200, Lambda: 0.1})
	feed(t, fixed, p, 0, 200)
	for name, lad := range map[string]*Ladder{"lasso d>n": lw, "fixed λ": fixed} {
		if k := lad.Extend(lad.Size()-1, lad.Size()-1); k != 0 || lad.Grid().MaxExtended != 0 {
			t.Errorf("%s: Extend moved %d, max %d; want 0, 0", name, k, lad.Grid().MaxExtended)
		}
	}
}

// TestUnpenalized checks Options.Unpenalized against the least-squares
// solution of the normal equations X̃ᵀX̃θ = X̃ᵀ(y − ȳ) solved with
// gonum/mat v0.17.0 (Gauss's least squares; any linear-algebra text).
func TestUnpenalized(t *testing.T) {
	const n, d = 200, 6
	p := makeProblem(24, n, d, 4, false, false)
	l, err := NewLadder(&Options{Features: d, Window: n, Unpenalized: true, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, n)
	if !l.Converge(1e-10, 100) {
		t.Fatalf("not converged: KKT %g", l.KKT(0))
	}
	xs, yc, ybar := standardize(p, 0, n)
	var th mat.VecDense
	if err := th.SolveVec(xs, mat.NewVecDense(n, yc)); err != nil {
		t.Fatal(err)
	}
	m := l.Model(0)
	if e := relErr(m.Standardized, th.RawVector().Data); e > 1e-8 {
		t.Errorf("θ rel err %g", e)
	}
	if m.Lambda != 0 || l.Size() != 1 || l.Grid().Anchor != AnchorFixed || math.Abs(m.StdIntercept-ybar) > 1e-8*math.Abs(ybar) {
		t.Errorf("λ %g size %d grid %+v b %g (ȳ %g)", m.Lambda, l.Size(), l.Grid(), m.StdIntercept, ybar)
	}
	if _, err := NewLadder(&Options{Features: d, Unpenalized: true, Lambda: 0.1}); err == nil {
		t.Error("Unpenalized with Lambda 0.1 accepted")
	}
}
