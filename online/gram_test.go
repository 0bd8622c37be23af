package online

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// gramStream returns n records of d features around 1000 ± 1 (a mean far
// from 0 against the spread, to exercise the shifted sums), correlated,
// with a sparse linear truth plus noise.
func gramStream(seed uint64, n, d int) problem {
	r := rand.New(rand.NewPCG(seed, 11))
	p := problem{x: make([][]float64, n), y: make([]float64, n), w: make([]float64, n)}
	for i := range n {
		x := make([]float64, d)
		common := r.NormFloat64()
		y := 1000 + 0.5*r.NormFloat64()
		for j := range d {
			z := 0.5*common + r.NormFloat64()
			x[j] = 1000 + z
			if j < 4 {
				y += float64(1+j) * z * float64(1-2*(j%2))
			}
		}
		p.x[i], p.y[i], p.w[i] = x, y, 1
	}
	return p
}

// TestGramClosedForm streams 50,000 records through a window of 1,000 into
// gram ladders and checks, on the final window: ridge against the closed
// form θ = (X̃ᵀX̃ + nλI)⁻¹X̃ᵀ(y − ȳ), b = ȳ (gonum/mat v0.17.0; Hoerl &
// Kennard 1970 in the 1/(2n) convention of Friedman, Hastie & Tibshirani
// 2010), and the lasso path against its KKT conditions (Hastie, Tibshirani
// & Wainwright 2015, ch. 2) computed here from X̃ and y directly with
// gonum, not from the learner's sums; and the learner's sums against a
// fresh rebuild from its records.
func TestGramClosedForm(t *testing.T) {
	const n, total, d = 1000, 50000, 8
	p := gramStream(5, total, d)
	xs, yc, ybar := standardize(p, total-n, total)
	var xtx mat.Dense
	xtx.Mul(xs.T(), xs)
	var xty mat.VecDense
	xty.MulVec(xs.T(), mat.NewVecDense(n, yc))

	t.Run("ridge", func(t *testing.T) {
		const lambda = 0.03
		l, err := NewLadder(&Options{Features: d, Penalty: &Penalty{Mix: 0}, Lambda: lambda, Window: n, Learner: "gram"})
		if err != nil {
			t.Fatal(err)
		}
		feed(t, l, p, 0, total)
		var a mat.Dense
		a.CloneFrom(&xtx)
		for j := range d {
			a.Set(j, j, a.At(j, j)+float64(n)*lambda)
		}
		var th mat.VecDense
		if err := th.SolveVec(&a, &xty); err != nil {
			t.Fatal(err)
		}
		o := l.Optimum(0, nil, nil)
		if e := relErr(o.Model.Standardized, th.RawVector().Data); e > 1e-8 {
			t.Errorf("θ rel err %g", e)
		}
		if e := math.Abs(o.Model.StdIntercept-ybar) / math.Abs(ybar); e > 1e-12 {
			t.Errorf("b = %v, want ȳ = %v", o.Model.StdIntercept, ybar)
		}
		if !o.Converged {
			t.Errorf("KKT %g", o.KKT)
		}
	})

	t.Run("lasso", func(t *testing.T) {
		l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram"})
		if err != nil {
			t.Fatal(err)
		}
		feed(t, l, p, 0, total)
		nonzero := 0
		for i, o := range l.OptimumPath(nil, nil) {
			th := mat.NewVecDense(d, o.Model.Standardized)
			var g mat.VecDense // gradient of the smooth part: (X̃ᵀX̃θ − X̃ᵀ(y − ȳ))/n
			g.MulVec(&xtx, th)
			g.SubVec(&g, &xty)
			g.ScaleVec(1/float64(n), &g)
			lam := l.Lambda(i)
			var worst float64
			for j := range d {
				gj, tj := g.AtVec(j), th.AtVec(j)
				if tj != 0 {
					nonzero++
					worst = max(worst, math.Abs(gj+lam*math.Copysign(1, tj)))
				} else {
					worst = max(worst, math.Abs(gj)-lam)
				}
			}
			// 1e-8 relative to λ_max, the scale of the gradient.
			if worst > 1e-8*l.Lambda(0) || !o.Converged {
				t.Errorf("member %d (λ %g): KKT by gonum %g, by the learner %g", i, lam, worst, o.KKT)
			}
			if e := math.Abs(o.Model.StdIntercept-ybar) / math.Abs(ybar); e > 1e-12 {
				t.Errorf("member %d: b = %v, want ȳ = %v", i, o.Model.StdIntercept, ybar)
			}
		}
		if nonzero == 0 {
			t.Fatal("every member empty: the path was not exercised")
		}
	})

	t.Run("sums", func(t *testing.T) {
		l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram"})
		if err != nil {
			t.Fatal(err)
		}
		// Stop just before a rebuild, so that the sums carry the most
		// rank-one additions and removals they ever do.
		feed(t, l, p, 0, n)
		c := l.lrn.(*covLearner)
		for c.builtAt != n || c.built < resyncEvery*n-1 {
			if err := l.Add(p.record(int(l.Seen()))); err != nil {
				t.Fatal(err)
			}
		}
		if c.built == 0 {
			t.Fatal("the sums were just rebuilt: nothing accumulated")
		}
		c.exactScale()
		c.system(c.inv)
		got := append([]float64(nil), c.solver.g...)
		gotC := append([]float64(nil), c.solver.c...)
		c.rebuild()
		c.exactScale()
		c.system(c.inv)
		if e := relErr(got, c.solver.g); e > 1e-12 {
			t.Errorf("G: rel err %g against a rebuild", e)
		}
		if e := relErr(gotC, c.solver.c); e > 1e-12 {
			t.Errorf("c: rel err %g against a rebuild", e)
		}
	})
}

// TestGramDriftingMeans streams records whose means drift by 0.1 to 0.6
// standard deviations per record (100 to 600 per window of 1,000, four
// times that per rebuild period), and checks the learner's
// standardized Gram matrix and cross-products against a rebuild from the
// records, and the ridge fit against gonum's closed form (as
// TestGramClosedForm), at several points of the stream: the shift must
// follow the means (shiftFar) or the sums lose their precision to
// cancellation.
func TestGramDriftingMeans(t *testing.T) {
	const n, d, lambda = 1000, 6, 0.02
	r := rand.New(rand.NewPCG(8, 9))
	p := problem{}
	for i := range 20000 {
		x := make([]float64, d)
		drift := 0.1 * float64(i)
		y := 3 * drift
		for j := range d {
			z := r.NormFloat64()
			x[j] = 1000 + drift*float64(j+1) + z
			y += z * float64(j%3)
		}
		p.x, p.y, p.w = append(p.x, x), append(p.y, y+r.NormFloat64()), append(p.w, 1)
	}
	l, err := NewLadder(&Options{Features: d, Penalty: &Penalty{Mix: 0}, Lambda: lambda, Window: n, Learner: "gram"})
	if err != nil {
		t.Fatal(err)
	}
	c := l.lrn.(*covLearner)
	for _, at := range []int{3900, 7700, 11999, 20000} {
		feed(t, l, p, int(l.Seen()), at)
		c.exactScale()
		c.system(c.inv)
		g, cv := append([]float64(nil), c.solver.g...), append([]float64(nil), c.solver.c...)
		o := l.Optimum(0, nil, nil)
		xs, yc, _ := standardize(p, at-n, at)
		var a mat.Dense
		a.Mul(xs.T(), xs)
		for j := range d {
			a.Set(j, j, a.At(j, j)+float64(n)*lambda)
		}
		var rhs, th mat.VecDense
		rhs.MulVec(xs.T(), mat.NewVecDense(n, yc))
		if err := th.SolveVec(&a, &rhs); err != nil {
			t.Fatal(err)
		}
		if e := relErr(o.Model.Standardized, th.RawVector().Data); e > 1e-8 {
			t.Errorf("record %d: θ rel err %g against the closed form", at, e)
		}
		// The same scale on both sides: the comparison is of the sums
		// (the running scaler has its own rounding, rebuilt too).
		inv := append([]float64(nil), c.inv...)
		c.rebuild()
		c.system(inv)
		if e := max(relErr(g, c.solver.g), relErr(cv, c.solver.c)); e > 1e-12 {
			t.Errorf("record %d: G, c rel err %g against a rebuild", at, e)
		}
	}
}

// TestGramMatchesSAGAOptimum checks the gram learner's exact path against
// the SAGA learner's (OptimumPath from a pass over the records, exact.go)
// on the same stream, with weights and missing values: two independent
// computations of the same optimum.
func TestGramMatchesSAGAOptimum(t *testing.T) {
	p := makeProblem(9, 3000, 12, 5, false, true)
	for i := range p.x {
		if i%7 == 3 {
			p.x[i][i%12] = math.NaN()
		}
	}
	for _, tc := range []struct {
		pen    Penalty
		lambda float64 // ridge: a fixed λ (its grid's spectrum is recomputed on each learner's own schedule)
	}{{Lasso(), 0}, {ElasticNet(0.5), 0}, {Ridge(), 0.05}} {
		pen := tc.pen
		mk := func(kind string) *Ladder {
			l, err := NewLadder(&Options{Features: 12, Window: 700, Learner: kind, Penalty: &pen, Lambda: tc.lambda})
			if err != nil {
				t.Fatal(err)
			}
			return l
		}
		g, s := mk("gram"), mk("saga")
		feed(t, g, p, 0, 3000)
		feed(t, s, p, 0, 3000)
		g.Idle(1) // both anchor their grid on the current window
		s.Idle(1)
		for i := range g.Size() {
			// λ_max comes from other sums (shifted against raw): equal to rounding.
			if math.Abs(g.Lambda(i)-s.Lambda(i)) > 1e-12*s.Lambda(i) {
				t.Fatalf("mix %v: λ_%d %v vs %v", pen.Mix, i, g.Lambda(i), s.Lambda(i))
			}
		}
		og, os := g.OptimumPath(nil, nil), s.OptimumPath(nil, nil)
		for i := range og {
			if e := relErr(og[i].Model.Standardized, os[i].Model.Standardized); e > 1e-7 || !og[i].Converged {
				t.Errorf("mix %v member %d: rel err %g, KKT %g", pen.Mix, i, e, og[i].KKT)
			}
		}
	}
}

// TestGramOptions checks that the gram learner refuses a loss other than
// the squared.
func TestGramOptions(t *testing.T) {
	if _, err := NewLadder(&Options{Features: 3, Learner: "gram", Loss: Logistic{}}); err == nil {
		t.Fatal("gram with the logistic loss accepted")
	}
}

// TestModelKKT checks Ladder.ModelKKT, the records' check of a fit: the
// exact fit of either learner passes at the tolerance, and a fit moved off
// its optimum by δ in one coefficient fails by about δ·G_jj (the KKT
// conditions of Hastie, Tibshirani & Wainwright 2015, ch. 2: moving θ_j by
// δ moves its gradient by δ times the j-th diagonal of the standardized
// Gram matrix, 1).
func TestModelKKT(t *testing.T) {
	p := makeProblem(4, 2000, 8, 4, false, true)
	for _, kind := range []string{"gram", "saga"} {
		l, err := NewLadder(&Options{Features: 8, Window: 1500, Learner: kind})
		if err != nil {
			t.Fatal(err)
		}
		feed(t, l, p, 0, 2000)
		o := l.Optimum(6, nil, nil)
		if k := l.ModelKKT(&o.Model); !(k <= DefaultKKT) {
			t.Errorf("%s: optimum's KKT on the records %g (its own %g)", kind, k, o.KKT)
		}
		m := o.Model
		m.Standardized = append([]float64(nil), m.Standardized...)
		m.Standardized[0] += 0.01
		if k := l.ModelKKT(&m); !(k > 0.005 && k < 0.02) {
			t.Errorf("%s: moved fit's KKT %g, want about 0.01", kind, k)
		}
	}
	d, err := NewLadder(&Options{Features: 8, Learner: "decay"})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, d, p, 0, 100)
	m := d.Model(0)
	if k := d.ModelKKT(&m); !math.IsNaN(k) {
		t.Errorf("decay: %g, want NaN", k)
	}
}

// TestGramSolveOnRead: on the record path the gram learner solves only the
// members it is asked for (Ladder.Ready). After each refresh of the scale
// every member is stale. A read of a stale member (Eta, Nonzero, Model,
// KKT) sees it solved on the current window: its KKT conditions measured
// on the records (Hastie, Tibshirani & Wainwright 2015, ch. 2;
// Ladder.ModelKKT, one pass, not the sums) hold to DefaultKKT and it is
// within 1e-7 of the window's optimum (Ladder.Optimum to 1e-12); the read
// keeps nothing (the saved state is byte for byte the same). Ready then
// solves that member alone and keeps exactly what the read saw. Idle
// solves every stale member.
func TestGramSolveOnRead(t *testing.T) {
	const d, n = 8, 2000 // R = solveEvery(2000) = 20
	p := makeProblem(21, 3*n, d, 4, false, true)
	l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram"})
	if err != nil {
		t.Fatal(err)
	}
	c := l.lrn.(*covLearner)
	stale := func() (k int) {
		for _, m := range c.ms {
			if m.stale {
				k++
			}
		}
		return k
	}
	reads := []struct {
		name string
		read func(i int)
	}{
		{"Eta", func(i int) { l.Eta(i, p.record(0).X) }},
		{"Nonzero", func(i int) { l.Nonzero(i) }},
		{"Model", func(i int) { l.Model(i) }},
		{"KKT", func(i int) { l.KKT(i) }},
	}
	at := 0
	for i := 0; i < 3*n; i++ {
		if err := l.Add(p.record(i)); err != nil {
			t.Fatal(err)
		}
		if i < n || c.sinceSolve != 0 {
			continue
		}
		// The refresh just happened: every member is stale.
		if k := stale(); k != l.Size() {
			t.Fatalf("record %d: %d stale members after the refresh, want %d", i, k, l.Size())
		}
		m := 2 + at%(l.Size()-2)
		rd := reads[at%len(reads)]
		at++
		before := must(l.MarshalBinary())
		rd.read(m)
		md := l.Model(m)
		if !bytes.Equal(before, must(l.MarshalBinary())) {
			t.Fatalf("record %d: %s(%d) and Model(%d) changed the ladder", i, rd.name, m, m)
		}
		if k := l.ModelKKT(&md); !(k <= DefaultKKT) {
			t.Errorf("record %d: member %d as read: KKT on the records %g", i, m, k)
		}
		ref := l.Optimum(m, nil, &ExactOptions{Tol: 1e-12, Target: 1e-12, Rounds: 100}).Model
		if dist := relDist(md.Standardized, ref.Standardized); !(dist <= 1e-7) {
			t.Errorf("record %d: member %d %g from the optimum", i, m, dist)
		}
		l.Ready(m)
		if k := stale(); k != l.Size()-1 || c.ms[m].stale {
			t.Fatalf("record %d: Ready(%d) left %d stale members (member %d stale: %v), want %d", i, m, k, m, c.ms[m].stale, l.Size()-1)
		}
		if got := l.Model(m); !slices.Equal(got.Standardized, md.Standardized) || got.StdIntercept != md.StdIntercept {
			t.Fatalf("record %d: member %d after Ready differs from the member as read", i, m)
		}
	}
	if at < 50 {
		t.Fatalf("%d refreshes checked, want 50 or more", at)
	}
	l.Idle(1)
	if k := stale(); k != 0 {
		t.Errorf("Idle left %d stale members", k)
	}
}

// TestGramFrom: a SAGA ladder of the squared loss taken over by a gram
// ladder keeps its window (the same records in the same order, with their
// weights and times), records seen and width, and each member equals, to
// 1e-12, a gram ladder with that member's λ fixed that was fed the window's
// records and converged (its own KKT solve to 1e-12, from zero). The SAGA
// ladder is not changed; another learner or loss is refused.
func TestGramFrom(t *testing.T) {
	en := ElasticNet(0.7)
	for _, pen := range []*Penalty{nil, &en} {
		o := Options{Features: 6, Window: 400, Penalty: pen, Span: 0, Seed: 3}
		s, err := NewLadder(&o)
		if err != nil {
			t.Fatal(err)
		}
		p := makeProblem(31, 1000, 6, 3, false, true)
		for i := range 1000 {
			r := p.record(i)
			r.T = int64(1000 * (i + 1))
			if i%7 == 0 {
				r.W = 0.5
			}
			if err := s.Add(r); err != nil {
				t.Fatal(err)
			}
		}
		before := must(s.MarshalBinary())
		g, err := GramFrom(s)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(before, must(s.MarshalBinary())) {
			t.Fatal("GramFrom changed the SAGA ladder")
		}
		if g.Learner() != "gram" || g.Len() != s.Len() || g.Seen() != s.Seen() || g.Features() != s.Features() {
			t.Fatalf("gram ladder: %s, %d records, %d seen, width %d; want gram, %d, %d, %d",
				g.Learner(), g.Len(), g.Seen(), g.Features(), s.Len(), s.Seen(), s.Features())
		}
		ws, wg := s.lrn.(*sagaLearner).ts, g.lrn.(*covLearner).ts
		window := make([]Record, 0, s.Len())
		for i, slot := range ws.order() {
			a, b := ws.ring.At(i), wg.ring.At(i)
			xa, xb := ws.row(slot), wg.row(wg.order()[i])
			if a != b || !slices.Equal(xa, xb) {
				t.Fatalf("window record %d: %+v %v, SAGA's %+v %v", i, b, xb, a, xa)
			}
			window = append(window, Record{X: slices.Clone(xa), Y: a.y, W: a.w, T: a.t})
		}
		for i := range g.Size() {
			lam := g.Lambda(i)
			ref, err := NewLadder(&Options{Features: 6, Window: 400, Penalty: pen, Lambda: lam, Learner: "gram"})
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range window {
				if err := ref.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			ref.Converge(1e-9, 1) // solves to min(tol/1000, gramTarget) = 1e-12
			a, b := g.Model(i), ref.Model(0)
			if d := relDist(a.Standardized, b.Standardized); !(d <= 1e-12) || math.Abs(a.Intercept-b.Intercept) > 1e-12*math.Abs(b.Intercept)+1e-12 {
				t.Errorf("member %d (λ %g): %g from the reference, intercept %v against %v", i, lam, d, a.Intercept, b.Intercept)
			}
		}
	}
	d, _ := NewLadder(&Options{Features: 3, Learner: "decay"})
	l, _ := NewLadder(&Options{Features: 3, Loss: Logistic{}})
	for _, bad := range []*Ladder{d, l} {
		if _, err := GramFrom(bad); !errors.Is(err, ErrOptions) {
			t.Errorf("%s %s: %v, want ErrOptions", bad.Learner(), bad.Loss().Name(), err)
		}
	}
}

// TestGramConstantFeature: a feature that goes constant on the window has
// no coefficient in any member or optimum (its standardized column is 0,
// so a nonzero θ_j is not a minimizer's: the lasso's KKT conditions, Hastie,
// Tibshirani & Wainwright 2015, ch. 2, leave θ_j free only where X̃_j ≠ 0,
// and the scaler's convention, like the SAGA learner's refresh, sets it to
// 0), read on the record path and after Idle.
func TestGramConstantFeature(t *testing.T) {
	const n, d = 200, 4
	p := gramStream(7, 4*n, d)
	for i := 2 * n; i < 4*n; i++ {
		p.x[i][0] = 1000 // feature 0, informative until now, goes flat
	}
	l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram", Size: 6})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, 2*n)
	l.Idle(1)
	if m := l.Model(l.Size() - 1); m.Standardized[0] == 0 {
		t.Fatalf("feature 0 not in the smallest λ's model before it goes flat: %v", m.Standardized)
	}
	check := func(when string) {
		t.Helper()
		for i := range l.Size() {
			if m := l.Model(i); m.Standardized[0] != 0 {
				t.Errorf("%s: member %d θ_0 = %v on a constant feature", when, i, m.Standardized[0])
			}
			if o := l.Optimum(i, nil, nil); o.Model.Standardized[0] != 0 {
				t.Errorf("%s: optimum %d θ_0 = %v on a constant feature", when, i, o.Model.Standardized[0])
			}
		}
	}
	feed(t, l, p, 2*n, 4*n)
	check("record path")
	l.Idle(1)
	check("idle")
}

// TestGramResetFeatureReads: after ResetFeature (and Grow's seeding, the
// same column rewrite) a member read is a solve on the window without the
// column, not the old solution with its coefficient cut out: its KKT
// violation (Hastie, Tibshirani & Wainwright 2015, ch. 2, from the learner's
// sums) is within the published tolerance on the unchanged scale.
func TestGramResetFeatureReads(t *testing.T) {
	const n, d = 300, 5
	p := gramStream(9, n, d)
	l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram", Size: 6})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, n)
	l.Idle(1)
	i := l.Size() - 1
	if m := l.Model(i); m.Standardized[0] == 0 {
		t.Fatalf("feature 0 not in member %d: %v", i, m.Standardized)
	}
	l.ResetFeature(0)
	for k := range l.Size() {
		if v := l.KKT(k); !(v <= DefaultKKT) {
			t.Errorf("member %d: KKT %g after ResetFeature", k, v)
		}
	}
}

// TestGramStaleReadIntercept: a member read between two refreshes of the
// scale, on a stream whose means drift, has the intercept that minimizes
// the squared loss for its coefficients: the window's mean residual
// y − η is 0 (the unpenalized intercept's optimality condition, ∂F/∂b = 0;
// Friedman, Hastie & Tibshirani 2010, §2.1), here computed from the raw
// records and Model.Eta, not from the learner's sums.
func TestGramStaleReadIntercept(t *testing.T) {
	const n, d = 2000, 6
	p := gramStream(3, 3*n, d)
	for i := range p.x {
		for j := range d {
			p.x[i][j] += 0.002 * float64(i) // the means drift 4 sd per window
		}
	}
	l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram", Size: 6})
	if err != nil {
		t.Fatal(err)
	}
	c := l.lrn.(*covLearner)
	checked := 0
	for i := range 3 * n {
		feed(t, l, p, i, i+1)
		if i < n || c.sinceSolve != c.every-1 {
			continue // read the members one record before the next refresh
		}
		for k := 1; k < l.Size(); k++ {
			m := l.Model(k)
			var r float64
			for q := i - n + 1; q <= i; q++ {
				r += p.y[q] - m.Eta(p.x[q])
			}
			if r /= n; !(math.Abs(r) <= 1e-9) {
				t.Errorf("record %d: member %d's mean residual %g", i, k, r)
			}
		}
		checked++
	}
	if checked < 50 {
		t.Fatalf("%d reads checked, want 50 or more", checked)
	}
}

// TestGramFarRecordLeaves: a valid record far out of the window's spread
// (1e30 in one feature, within the accepted ±1e50) enters and leaves the
// window; once it has left, the gram ladder's optimum equals that of a
// ladder fed only the records of its window (to 1e-9), and its KKT
// residual measured on the records (ModelKKT, Hastie, Tibshirani &
// Wainwright 2015, ch. 2) is within the published tolerance: the sums'
// cancellation is repaired by a rebuild, not carried to the next
// scheduled one.
func TestGramFarRecordLeaves(t *testing.T) {
	const n, d = 500, 4
	p := gramStream(3, 3*n, d)
	p.x[n+10][1] = 1e30
	for _, lam := range []float64{0.01, 0.1, 1} { // a fixed λ: the grids of the two ladders would differ
		farRecord(t, p, n, d, lam)
	}
}

// farRecord is TestGramFarRecordLeaves at one fixed λ.
func farRecord(t *testing.T, p problem, n, d int, lam float64) {
	t.Helper()
	l, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram", Lambda: lam})
	if err != nil {
		t.Fatal(err)
	}
	ref, err := NewLadder(&Options{Features: d, Window: n, Learner: "gram", Lambda: lam})
	if err != nil {
		t.Fatal(err)
	}
	feed(t, l, p, 0, 3*n)
	feed(t, ref, p, 2*n, 3*n)
	for i := range l.Size() {
		got, want := l.Optimum(i, nil, nil).Model, ref.Optimum(i, nil, nil).Model
		if !(relDist(got.Coef, want.Coef) <= 1e-9) {
			t.Errorf("λ %v: coef %v, the window alone %v", lam, got.Coef, want.Coef)
		}
		if k := l.ModelKKT(&got); !(k <= DefaultKKT) {
			t.Errorf("λ %v: KKT on the records %g", lam, k)
		}
	}
}

// TestGramHeavyRecordLeaves: a record of weight 1e20 (within the accepted
// [1e-50, 1e50]) on a window whose feature is constant enters and leaves;
// once it has left, the published intercept is the window's mean label
// (with a constant feature the squared loss's minimizer is the intercept
// alone, b = ȳ: common practice, no single source), not the NaN or
// garbage of a weight sum that cancelled to 0.
func TestGramHeavyRecordLeaves(t *testing.T) {
	const n = 300
	r := rand.New(rand.NewPCG(1, 2))
	l, err := NewLadder(&Options{Features: 1, Window: n, Learner: "gram", Lambda: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	var sum float64
	for i := range 3 * n {
		y, w := r.NormFloat64(), 1.0
		if i == n+7 {
			y, w = 100, 1e20
		}
		if err := l.Add(Record{X: []float64{5}, Y: y, W: w}); err != nil {
			t.Fatal(err)
		}
		if i >= 2*n {
			sum += y
		}
	}
	o := l.Optimum(0, nil, nil)
	if want := sum / n; !(math.Abs(o.Model.Intercept-want) <= 1e-9) || o.Model.Weight != n {
		t.Fatalf("intercept %v (want %v), weight %v (want %d), KKT %v", o.Model.Intercept, want, o.Model.Weight, n, o.KKT)
	}
}

// TestGramShrinkReads: right after Shrink (drift adaptation), before any
// record arrives, a member read is solved on the shrunk window: its KKT
// violation (Hastie, Tibshirani & Wainwright 2015, ch. 2, from the
// learner's sums on the refreshed scale) is within the published
// tolerance, and its model equals the window's optimum.
func TestGramShrinkReads(t *testing.T) {
	const n, d = 1000, 5
	p := gramStream(13, 2*n, d)
	for i := n + n/2; i < 2*n; i++ {
		p.y[i] -= 6 * (p.x[i][2] - 1000) // the newest half follows another truth
	}
	for _, o := range []Options{{Size: 6}, {Lambda: 0.05}} { // a grid that re-anchors, and a fixed λ
		o.Features, o.Window, o.Learner = d, n, "gram"
		shrinkReads(t, p, &o)
	}
}

// shrinkReads is TestGramShrinkReads with the options o.
func shrinkReads(t *testing.T, p problem, o *Options) {
	t.Helper()
	l, err := NewLadder(o)
	if err != nil {
		t.Fatal(err)
	}
	n := o.Window
	feed(t, l, p, 0, 2*n)
	l.Idle(1)
	l.Shrink(n / 2)
	for i := range l.Size() {
		if v := l.KKT(i); !(v <= DefaultKKT) {
			t.Errorf("member %d: KKT %g after Shrink", i, v)
		}
		m, o := l.Model(i), l.Optimum(i, nil, nil).Model
		if !(relDist(m.Standardized, o.Standardized) <= 1e-6) {
			t.Errorf("member %d: %v, the optimum %v", i, m.Standardized, o.Standardized)
		}
	}
}
