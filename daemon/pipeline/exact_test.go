package pipeline

import (
	"math"
	"math/rand/v2"
	"testing"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
)

// TestPublishedIsOptimum streams a stationary linear (and a logistic)
// problem through the pipeline at the daemon's defaults (window 10,000,
// K = 12, 2 steps per record, retune every 500, one-SE rule) with no idle
// time, publishes every 2,500 records, and checks every published model
// against the batch optimum of its window at its λ, computed with the
// existing batch solver (online.Ladder.Converge to KKT 1e-9 on a fixed-λ
// ladder fed the same window): the document's KKT residual is at most
// 1e-6, the support is exactly the batch optimum's, and the standardized
// coefficients agree to 1e-5. The stream is a constructed one (y = xᵀβ + ε
// with 4 of 16 features informative, x ~ N(0, I); for logistic
// P(y = 1) = σ(xᵀβ)), no published source; the KKT conditions are those of
// the elastic net (Hastie, Tibshirani & Wainwright 2015, ch. 2 and 5).
func TestPublishedIsOptimum(t *testing.T) {
	cases := []struct {
		loss    string
		records int
	}{
		{config.LossSquared, 50000},
		{config.LossLogistic, 20000},
	}
	if testing.Short() {
		cases[0].records, cases[1].records = 15000, 12500
	}
	const d = 16
	beta := []float64{1.5, -1, 0.5, 0.25}
	for _, tc := range cases {
		t.Run(tc.loss, func(t *testing.T) {
			m := config.DefaultModel()
			m.Name, m.Subject, m.Loss = "exact", "test.exact", tc.loss
			m.Features = featureNames(d)
			m.MaxFeatures = d
			h := newHarness(t, m)
			rng := rand.New(rand.NewPCG(7, 8))
			win := m.Window.Records
			ring := make([]online.Record, 0, win) // the train window, as the test sees it
			var rec record.Record
			checked := 0
			for i := range tc.records {
				x := make([]float64, d)
				var eta float64
				for j := range x {
					x[j] = rng.NormFloat64()
					if j < len(beta) {
						eta += beta[j] * x[j]
					}
				}
				y := eta + rng.NormFloat64()
				if tc.loss == config.LossLogistic {
					y = 0
					if rng.Float64() < 1/(1+math.Exp(-eta)) {
						y = 1
					}
				}
				rec.X, rec.Y, rec.W = append(rec.X[:0], x...), y, 1
				st, err := h.p.Apply(&rec, h.names, h.now)
				if err != nil {
					t.Fatal(err)
				}
				if !st.HeldOut {
					if len(ring) == win {
						ring = append(ring[:0], ring[1:]...)
					}
					ring = append(ring, online.Record{X: x, Y: y})
				}
				if i%2500 != 2499 || h.p.Current() < 0 {
					continue
				}
				s := h.publish()
				checkOptimum(t, s, ring, tc.loss, d)
				checked++
			}
			if checked < tc.records/2500-2 {
				t.Fatalf("only %d publications checked", checked)
			}
		})
	}
}

// checkOptimum compares a published snapshot with the batch optimum of
// window at the snapshot's λ.
func checkOptimum(t *testing.T, s *Snapshot, window []online.Record, loss string, d int) {
	t.Helper()
	doc := s.Doc
	if doc.KKT == nil || *doc.KKT > 1e-6 || !doc.Exact() {
		t.Fatalf("version %d: KKT %v (tolerance %g)", doc.Version, doc.KKT, doc.KKTTolerance)
	}
	o := &online.Options{Features: d, Window: len(window), Lambda: doc.Penalty.Lambda, Seed: 1}
	if loss == config.LossLogistic {
		o.Loss = online.Logistic{}
	}
	ref, err := online.NewLadder(o)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range window {
		if err := ref.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	if !ref.Converge(1e-9, 200) {
		t.Fatalf("version %d: the batch reference did not converge", doc.Version)
	}
	want := ref.Model(0)
	if want.Records != doc.Records.Window {
		t.Fatalf("window %d records, the test's %d", doc.Records.Window, want.Records)
	}
	for j, name := range doc.Features {
		got, ok := doc.Standardized[name]
		if ok != (want.Standardized[j] != 0) {
			t.Fatalf("version %d (λ index %d): %s published %g, batch optimum %g", doc.Version, doc.LambdaIndex, name, got, want.Standardized[j])
		}
		if math.Abs(got-want.Standardized[j]) > 1e-5 {
			t.Fatalf("version %d: %s published %g, batch optimum %g", doc.Version, name, got, want.Standardized[j])
		}
	}
}
