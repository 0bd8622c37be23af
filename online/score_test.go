package online

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// scoreFixture trains a small ladder on a linear (squared) or logistic
// stream and fills a holdout from the same stream with uneven weights.
func scoreFixture(t testing.TB, loss Loss, d, k, nTrain, nHold int, weighted bool) (*Ladder, *Holdout) {
	t.Helper()
	return scoreStream(t, loss, d, k, nTrain, nHold, weighted, 0, 0)
}

// scoreStream is scoreFixture with every feature shifted by offset and,
// with probability missing, one feature of a held-out record missing.
func scoreStream(t testing.TB, loss Loss, d, k, nTrain, nHold int, weighted bool, offset, missing float64) (*Ladder, *Holdout) {
	t.Helper()
	l, err := NewLadder(&Options{Loss: loss, Features: d, Size: k, Window: nTrain, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	h := NewHoldout(d, nHold)
	h.SetLoss(loss)
	rng := rand.New(rand.NewPCG(5, 9))
	x := make([]float64, d)
	draw := func() Record {
		eta := 0.3
		for j := range x {
			z := rng.NormFloat64()
			x[j] = offset + z
			if j < 3 {
				eta += float64(3-j) * z
			}
		}
		y := eta + rng.NormFloat64()
		if _, ok := loss.(Logistic); ok {
			y = 0
			if rng.Float64() < Sigmoid(eta) {
				y = 1
			}
		}
		w := 0.0
		if weighted {
			w = 0.5 + 2*rng.Float64()
		}
		return Record{X: x, Y: y, W: w}
	}
	for range nTrain {
		if err := l.Add(draw()); err != nil {
			t.Fatal(err)
		}
	}
	for range nHold {
		r := draw()
		if missing > 0 && rng.Float64() < missing {
			r.X[rng.IntN(d)] = math.NaN()
		}
		if err := h.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	return l, h
}

// TestScoreMatchesReference recomputes every metric from the ladder's model
// snapshots with gonum v0.17.0 (stat.Mean, stat.StdDev, stat.RSquaredFrom),
// the brute-force Mann-Whitney AUC and the textbook definitions of RMSE, MAE
// and the Brier score (Brier 1950).
func TestScoreMatchesReference(t *testing.T) {
	for _, loss := range []Loss{Squared{}, Logistic{}} {
		for _, weighted := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s/weighted=%v", loss.Name(), weighted), func(t *testing.T) {
				l, h := scoreFixture(t, loss, 6, 5, 400, 150, weighted)
				l.Converge(1e-6, 200)
				scores := l.Score(h, nil)
				if len(scores) != l.Size() {
					t.Fatalf("%d scores for %d members", len(scores), l.Size())
				}
				for i, s := range scores {
					checkScoreMember(t, l, h, i, s, weighted)
				}
			})
		}
	}
}

func checkScoreMember(t *testing.T, l *Ladder, h *Holdout, i int, s Score, weighted bool) {
	t.Helper()
	m := l.Model(i)
	n := h.Len()
	eta, ys, ws, losses := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for k := range n {
		x, y, w := h.At(k)
		eta[k], ys[k], ws[k] = m.Eta(x), y, w
		losses[k] = l.Loss().Value(y, eta[k])
	}
	var wts []float64
	if weighted {
		wts = ws
	}
	near := func(name string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
			t.Errorf("member %d %s = %v, want %v", i, name, got, want)
		}
	}
	if s.Index != i || s.Lambda != l.Lambda(i) || s.Nonzero != l.Nonzero(i) {
		t.Errorf("member %d: Index %d Lambda %v Nonzero %d", i, s.Index, s.Lambda, s.Nonzero)
	}
	near("Loss", s.Loss, stat.Mean(losses, wts))
	if !weighted {
		near("SE", s.SE, stat.StdDev(losses, nil)/math.Sqrt(float64(n)))
	}
	res2, absRes, brier := make([]float64, n), make([]float64, n), make([]float64, n)
	for k := range n {
		res2[k] = (ys[k] - eta[k]) * (ys[k] - eta[k])
		absRes[k] = math.Abs(ys[k] - eta[k])
		p := Sigmoid(eta[k])
		brier[k] = (p - ys[k]) * (p - ys[k])
	}
	switch l.Loss().(type) {
	case Squared:
		near("RMSE", s.RMSE, math.Sqrt(stat.Mean(res2, wts)))
		near("MAE", s.MAE, stat.Mean(absRes, wts))
		near("R2", s.R2, stat.RSquaredFrom(eta, ys, wts))
		if s.AUC != 0 || s.Brier != 0 || s.LogLoss != 0 {
			t.Errorf("member %d: logistic metrics set for squared loss: %+v", i, s)
		}
	case Logistic:
		near("LogLoss", s.LogLoss, s.Loss)
		near("Brier", s.Brier, stat.Mean(brier, wts))
		near("AUC", s.AUC, rocBruteMannWhitney(eta, ys, ws))
		if s.RMSE != 0 || s.MAE != 0 || s.R2 != 0 {
			t.Errorf("member %d: squared metrics set for logistic loss: %+v", i, s)
		}
	}
}

// TestScoreWeightedSE checks the weighted standard error on a hand-computed
// example: losses 1, 2, 4 with weights 1, 1, 2 give L = 11/4,
// Σw(ℓ−L)² = 6.75, s² = 6.75/(4 − 6/4) = 2.7 and SE = √(2.7·6)/4, which is
// also √(Σw²·s²)/W, the standard deviation of Σwℓ/W for independent losses
// of variance s² (reliability weights as in GSL's gsl_stats_wvariance,
// value from memory).
func TestScoreWeightedSE(t *testing.T) {
	h := NewHoldout(1, 3)
	for i, w := range []float64{1, 1, 2} {
		if err := h.Add(Record{X: []float64{0}, Y: float64(i), W: w}); err != nil {
			t.Fatal(err)
		}
	}
	copy(h.vals, []float64{1, 2, 4})
	lab := h.labelStats(Reals)
	got := h.stdErr(11.0/4, lab)
	if want := math.Sqrt(2.7*6) / 4; math.Abs(got-want) > 1e-14 {
		t.Fatalf("SE = %v, want %v", got, want)
	}
}

// TestScoreSEScaleInvariant checks that multiplying every weight by a
// constant changes neither the mean loss nor its SE, and that unit weights
// and the default weight 0 agree. Source: with reliability weights (GSL's
// gsl_stats_wvariance, value from memory) L = Σwℓ/W, s² = Σw(ℓ−L)²/(W − Σw²/W)
// and SE = √(Σw²·s²)/W are each of degree 0 in w, so scaling w by c leaves
// them unchanged.
func TestScoreSEScaleInvariant(t *testing.T) {
	l, h := scoreFixture(t, Squared{}, 4, 3, 200, 80, false)
	base := l.Score(h, nil)
	h2 := NewHoldout(4, 80)
	for k := range h.Len() {
		x, y, _ := h.At(k)
		if err := h2.Add(Record{X: x, Y: y, W: 3.5}); err != nil {
			t.Fatal(err)
		}
	}
	scaled := l.Score(h2, nil)
	for i := range base {
		if math.Abs(base[i].Loss-scaled[i].Loss) > 1e-12 || math.Abs(base[i].SE-scaled[i].SE) > 1e-12 {
			t.Errorf("member %d: unit %v±%v, scaled %v±%v", i, base[i].Loss, base[i].SE, scaled[i].Loss, scaled[i].SE)
		}
	}
}

// TestScoreEdgeCases checks Score on an empty holdout and the conventions
// that keep NaN out of it. Sources: AUC 0.5 when a class is missing (the
// chance-level value; common practice, no single source); SE 0 for a single
// record, whose reliability-weight denominator W − Σw²/W is 0 (GSL's
// gsl_stats_wvariance, value from memory); R² = 1 − SSE/SST, and for constant
// labels 1 for a perfect fit and 0 otherwise (scikit-learn 1.2.1 r2_score
// with force_finite=True, value from memory).
func TestScoreEdgeCases(t *testing.T) {
	l, err := NewLadder(&Options{Loss: Logistic{}, Features: 2, Size: 3})
	if err != nil {
		t.Fatal(err)
	}
	h := NewHoldout(2, 5)
	if s := l.Score(h, make([]Score, 7)); len(s) != 0 {
		t.Fatalf("empty holdout gave %d scores", len(s))
	}
	// Only positives (AUC undefined → 0.5), one record (SE 0), and a label
	// outside {0, 1} that an unchecked holdout let in (skipped).
	for _, r := range []Record{{X: []float64{1, 2}, Y: 1}, {X: []float64{1, math.NaN()}, Y: 3}} {
		if err := h.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	for _, s := range l.Score(h, nil) {
		if s.AUC != 0.5 || s.SE != 0 || math.IsNaN(s.Loss) || math.IsNaN(s.Brier) {
			t.Errorf("member %d: %+v", s.Index, s)
		}
	}
	// Constant labels: R² is 1 for a perfect fit and 0 otherwise (a
	// convention of this package, chosen so that no NaN leaves Score).
	if rSquared(0, 0) != 1 || rSquared(1, 0) != 0 || rSquared(1, 4) != 0.75 {
		t.Error("rSquared conventions")
	}
}

func TestScorePanicsOnDimension(t *testing.T) {
	l, err := NewLadder(&Options{Features: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if recover() == nil {
			t.Fatal("no panic on a holdout with the wrong number of features")
		}
	}()
	l.Score(NewHoldout(3, 2), nil)
}

// TestScoreAllocs covers the folded path, the standardized fallback and
// records with missing values.
func TestScoreAllocs(t *testing.T) {
	for _, loss := range []Loss{Squared{}, Logistic{}} {
		l, h := scoreFixture(t, loss, 8, 6, 300, 100, true)
		lo, ho := offsetFixture(t, loss, "saga", 1e6)
		for _, f := range []struct {
			name string
			l    *Ladder
			h    *Holdout
		}{{"centered", l, h}, {"offset, missing values", lo, ho}} {
			dst := make([]Score, 0, f.l.Size())
			pred := make([]float64, 0, f.h.Len())
			if n := testing.AllocsPerRun(20, func() {
				dst = f.l.Score(f.h, dst)
				pred = f.l.HoldoutPredictions(1, f.h, pred)
			}); n != 0 {
				t.Errorf("%s %s: Score and HoldoutPredictions allocate %v times per call", loss.Name(), f.name, n)
			}
		}
	}
}

// BenchmarkScore measures one retune at the daemon's defaults: K = 12
// members on 2000 held-out records of d = 32 features; "offset" shifts
// every feature by 1e6 (the standardized fallback of foldLimit) and
// "missing" gives 5% of the held-out records a missing value.
func BenchmarkScore(b *testing.B) {
	for _, bc := range []struct {
		name            string
		loss            Loss
		offset, missing float64
	}{
		{"squared", Squared{}, 0, 0},
		{"logistic", Logistic{}, 0, 0},
		{"squared-offset", Squared{}, 1e6, 0},
		{"squared-missing", Squared{}, 0, 0.05},
	} {
		b.Run(bc.name, func(b *testing.B) {
			l, h := scoreStream(b, bc.loss, 32, 12, 4000, 2000, false, bc.offset, bc.missing)
			dst := make([]Score, 0, 12)
			b.ReportAllocs()
			for b.Loop() {
				dst = l.Score(h, dst)
			}
		})
	}
}

// TestHoldoutPredictions checks that predictions, labels and weights taken
// out of the holdout reproduce Score's AUC and Brier score through the
// exported ROC functions (same definitions, Fawcett 2006 and Brier 1950).
func TestHoldoutPredictions(t *testing.T) {
	l, h := scoreFixture(t, Logistic{}, 5, 4, 300, 120, true)
	l.Idle(200)
	scores := l.Score(h, nil)
	y, w := h.Labels(nil), h.Weights(nil)
	var pred []float64
	for i, s := range scores {
		pred = l.HoldoutPredictions(i, h, pred)
		if len(pred) != h.Len() {
			t.Fatalf("%d predictions for %d records", len(pred), h.Len())
		}
		if got := AUC(pred, y, w); math.Abs(got-s.AUC) > 1e-12 {
			t.Errorf("member %d: AUC of predictions %v, Score.AUC %v", i, got, s.AUC)
		}
		var brier, sw float64
		for k, p := range pred {
			brier += w[k] * (p - y[k]) * (p - y[k])
			sw += w[k]
		}
		if math.Abs(brier/sw-s.Brier) > 1e-12 {
			t.Errorf("member %d: Brier of predictions %v, Score.Brier %v", i, brier/sw, s.Brier)
		}
	}
}

// offsetFixture trains a ladder on d features x_j = offset·(1 + j/d) +
// z_j·(0.5 + j/d), z standard normal, so that |μ_j|/s_j is about offset,
// and fills a holdout of n records from the same stream in which about
// one record in five has a missing (NaN) feature.
func offsetFixture(t *testing.T, loss Loss, learner string, offset float64) (*Ladder, *Holdout) {
	t.Helper()
	const d, nTrain, nHold = 8, 600, 300
	l, err := NewLadder(&Options{Loss: loss, Features: d, Size: 6, Window: nTrain, Seed: 3, Learner: learner, HalfLife: 500})
	if err != nil {
		t.Fatal(err)
	}
	h := NewHoldout(d, nHold)
	h.SetLoss(loss)
	rng := rand.New(rand.NewPCG(11, 13))
	x := make([]float64, d)
	draw := func(missing bool) Record {
		eta := 0.2
		for j := range x {
			z := rng.NormFloat64()
			x[j] = offset*(1+float64(j)/d) + z*(0.5+float64(j)/d)
			eta += float64(d/2-j) / 2 * z
		}
		if missing && rng.IntN(5) == 0 {
			x[rng.IntN(d)] = math.NaN()
		}
		y := eta + 0.5*rng.NormFloat64()
		if _, ok := loss.(Logistic); ok {
			y = 0
			if rng.Float64() < Sigmoid(eta) {
				y = 1
			}
		}
		return Record{X: x, Y: y, W: 0.5 + rng.Float64()}
	}
	for range nTrain {
		if err := l.Add(draw(false)); err != nil {
			t.Fatal(err)
		}
	}
	l.Idle(100)
	for range nHold {
		if err := h.Add(draw(true)); err != nil {
			t.Fatal(err)
		}
	}
	return l, h
}

// etaTerms returns |b| + Σ|θ_j x̃_j| of member i on x (missing values
// skipped), the magnitude the standardized sum b + x̃ᵀθ is rounded against.
func etaTerms(l *Ladder, i int, x []float64) float64 {
	b, th := l.members[i].params()
	mu, _, inv := l.scale()
	s := math.Abs(b)
	for j, v := range x {
		if v == v {
			s += math.Abs(th[j] * (v - mu[j]) * inv[j])
		}
	}
	return s
}

// TestScoreFoldMatchesEta checks Score's per-record predictor against
// Ladder.Eta (the standardized b + x̃ᵀθ, missing values at the mean) for
// every member and held-out record, both losses and both learners, to
// 1e-12 of |b| + Σ|θ_j x̃_j|; and Score's mean loss against the same mean
// taken through Ladder.Eta, to 1e-12 relative. The offsets cover the folded
// raw-unit path (|μ|/s ≈ 0 and just under foldLimit) and the standardized
// fallback beyond it (|μ|/s ≈ 2e6, where folding would lose about 1e-9).
// Reference: the algebra of fold (b + x̃ᵀθ = b' + cᵀx); no external source.
func TestScoreFoldMatchesEta(t *testing.T) {
	tests := []struct {
		name   string
		offset float64
		raw    bool // every member with a nonzero coefficient takes the folded path
	}{
		{"centered", 0, true},
		{"offset near foldLimit", foldLimit / 2.2, true},
		{"offset beyond foldLimit", 1e6, false},
	}
	for _, tc := range tests {
		for _, loss := range []Loss{Squared{}, Logistic{}} {
			for _, learner := range []string{"saga", "decay"} {
				t.Run(fmt.Sprintf("%s/%s/%s", tc.name, loss.Name(), learner), func(t *testing.T) {
					l, h := offsetFixture(t, loss, learner, tc.offset)
					checkFold(t, l, h, tc.raw)
				})
			}
		}
	}
}

func checkFold(t *testing.T, l *Ladder, h *Holdout, wantRaw bool) {
	t.Helper()
	missing, support := 0, 0
	var worst float64
	for i := range l.Size() {
		p := h.predictor(l, i)
		if l.Nonzero(i) > 0 {
			support++
			if p.raw != wantRaw {
				t.Errorf("member %d: folded %v, want %v", i, p.raw, wantRaw)
			}
		}
		for k := range h.Len() {
			x, miss := h.record(h.slot(k))
			if miss {
				missing++
			}
			got, want := p.eta(x, miss), l.Eta(i, x)
			e := math.Abs(got-want) / etaTerms(l, i, x)
			worst = max(worst, e)
			if !(e <= 1e-12) {
				t.Errorf("member %d record %d (missing %v): η %v, Ladder.Eta %v", i, k, miss, got, want)
			}
		}
	}
	t.Logf("worst relative difference %.3g", worst)
	checkPredictions(t, l, h)
	if support < 2 || missing == 0 || missing == h.Len()*l.Size() {
		t.Fatalf("fixture too weak: %d members with support, %d missing records", support, missing)
	}
	for _, s := range l.Score(h, nil) {
		var sum, sw float64
		for k := range h.Len() {
			x, y, w := h.At(k)
			sum += w * l.Loss().Value(y, l.Eta(s.Index, x))
			sw += w
		}
		if want := sum / sw; math.Abs(s.Loss-want) > 1e-12*math.Abs(want) {
			t.Errorf("member %d: Score.Loss %v, through Ladder.Eta %v", s.Index, s.Loss, want)
		}
	}
}

// checkPredictions compares HoldoutPredictions, which shares Score's
// predictor, with Ladder.Eta (σ of it for the logistic loss).
func checkPredictions(t *testing.T, l *Ladder, h *Holdout) {
	t.Helper()
	_, logistic := l.Loss().(Logistic)
	var pred []float64
	for i := range l.Size() {
		pred = l.HoldoutPredictions(i, h, pred)
		for k, got := range pred {
			x, _, _ := h.At(k)
			want := l.Eta(i, x)
			tol := 1e-12 * etaTerms(l, i, x)
			if logistic {
				want, tol = Sigmoid(want), 1e-12*max(etaTerms(l, i, x), 1) // σ is 1/4-Lipschitz
			}
			if !(math.Abs(got-want) <= tol) {
				t.Errorf("member %d record %d: prediction %v, from Ladder.Eta %v", i, k, got, want)
			}
		}
	}
}
