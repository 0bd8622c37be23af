package online

import (
	"errors"
	"fmt"
	"math"
	"testing"
)

// TestGrowBitIdentical: a ladder that starts one feature wide and grows to
// the width of its stream before the first record trains bit for bit as a
// ladder of that width from the start, for both learners, both losses, a
// weighted stream and one with missing values; the held-out scores agree
// too. This is the width growth of a pipeline whose names are learned from
// the first record, against one with a fixed feature list.
func TestGrowBitIdentical(t *testing.T) {
	const d, n = 7, 600
	for _, c := range []struct {
		name                   string
		learner                string
		logistic, weighted, na bool
		size                   int
	}{
		{name: "saga", learner: "saga", size: 6},
		{name: "saga_k1", learner: "saga", size: 1},
		{name: "saga_logistic_weighted", learner: "saga", logistic: true, weighted: true, size: 5},
		{name: "saga_missing", learner: "saga", na: true, size: 4},
		{name: "decay", learner: "decay", size: 4},
		{name: "gram", learner: "gram", size: 6},
		{name: "gram_missing_weighted", learner: "gram", na: true, weighted: true, size: 4},
	} {
		t.Run(c.name, func(t *testing.T) {
			var loss Loss = Squared{}
			if c.logistic {
				loss = Logistic{}
			}
			opt := Options{Loss: loss, Features: d, Window: 200, Size: c.size, Seed: 9, Learner: c.learner}
			fixed, err := NewLadder(&opt)
			if err != nil {
				t.Fatal(err)
			}
			opt.Features, opt.MaxFeatures = 1, 64
			grown, err := NewLadder(&opt)
			if err != nil {
				t.Fatal(err)
			}
			grown.Grow(d)
			if grown.Features() != d || grown.MaxFeatures() != 64 {
				t.Fatalf("width %d max %d", grown.Features(), grown.MaxFeatures())
			}
			p := makeProblem(5, n, d, 3, c.logistic, c.weighted)
			h := NewHoldout(d, 100)
			h.SetLoss(loss)
			for i := range n {
				r := p.record(i)
				if c.na && i%3 == 1 {
					r.X[(i/3)%d] = math.NaN()
				}
				if i%5 == 4 {
					if err := h.Add(r); err != nil {
						t.Fatal(err)
					}
					continue
				}
				if err := fixed.Add(r); err != nil {
					t.Fatal(err)
				}
				if err := grown.Add(r); err != nil {
					t.Fatal(err)
				}
				if i%97 == 0 {
					fixed.Idle(5)
					grown.Idle(5)
				}
			}
			sameLadder(t, "end", fixed, grown, h)
		})
	}
}

// TestGrowMidStream: a column added to a window that already holds records
// starts from its first value (mean = that value, no spread, Σ w y x_j =
// v·Σ w y), and the ladder then agrees with one whose every earlier record
// had carried that value (the missing policy: a missing value is the
// column's mean). Checked against a recompute of the scaler from the
// stored rows (two-pass mean and squared deviations, scaler.recompute).
func TestGrowMidStream(t *testing.T) {
	const d, n = 4, 120
	p := makeProblem(11, n, d+1, 3, false, false)
	opt := Options{Features: d, MaxFeatures: 8, Window: 50, Size: 3, Seed: 2}
	l, err := NewLadder(&opt)
	if err != nil {
		t.Fatal(err)
	}
	for i := range 60 {
		r := p.record(i)
		r.X = r.X[:d]
		if err := l.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	l.Grow(d + 2)
	if !l.Fresh(d) || !l.Fresh(d+1) || l.Fresh(0) {
		t.Fatal("fresh flags wrong after Grow")
	}
	for _, m := range []Model{l.Model(0), l.Model(2)} {
		if len(m.Coef) != d+2 || m.Coef[d] != 0 || m.Coef[d+1] != 0 {
			t.Fatalf("grown model %v", m.Coef)
		}
	}
	first := p.record(60).X[d]
	for i := 60; i < n; i++ {
		r := p.record(i)
		r.X = append(r.X[:d:d], r.X[d], math.NaN()) // column d+1 stays unseen
		if err := l.Add(r); err != nil {
			t.Fatal(err)
		}
		if i == 60 {
			s := l.lrn.(*sagaLearner)
			sc := &s.ts.sc
			if sc.mean[d] != first || sc.m2[d] != 0 {
				t.Fatalf("first value %v: mean %v m2 %v", first, sc.mean[d], sc.m2[d])
			}
		}
	}
	if l.Fresh(d) || !l.Fresh(d+1) {
		t.Fatal("fresh flags wrong after values")
	}
	// The running statistics agree with a two-pass recompute over the rows.
	s := l.lrn.(*sagaLearner)
	want := newScaler(d + 2)
	slots := s.ts.order()
	want.recompute(len(slots), func(i int) []float64 { return s.ts.row(slots[i]) },
		func(i int) (y, w float64) { m := s.ts.ring.At(i); return m.y, m.w })
	for j := range d + 2 {
		if math.Abs(want.mean[j]-s.ts.sc.mean[j]) > 1e-9*(1+math.Abs(want.mean[j])) ||
			math.Abs(want.m2[j]-s.ts.sc.m2[j]) > 1e-9*(1+want.m2[j]) {
			t.Errorf("feature %d: running mean %v m2 %v, recomputed %v %v", j, s.ts.sc.mean[j], s.ts.sc.m2[j], want.mean[j], want.m2[j])
		}
	}
	if m := l.Model(2); m.Coef[d+1] != 0 || m.Std[d+1] != 0 {
		t.Errorf("unseen column: coef %v std %v", m.Coef[d+1], m.Std[d+1])
	}
}

// TestResetFeature: a reset column has a zero coefficient in every member,
// zero statistics and scale, and is fresh; the holdout reads it as
// missing; the other columns are untouched; a later value starts it from
// that value; and training goes on without NaN.
func TestResetFeature(t *testing.T) {
	for _, learner := range []string{"saga", "decay", "gram"} {
		t.Run(learner, func(t *testing.T) {
			const d = 5
			p := makeProblem(4, 400, d, 4, false, false)
			l, err := NewLadder(&Options{Features: d, Window: 100, Size: 4, Seed: 3, Learner: learner})
			if err != nil {
				t.Fatal(err)
			}
			h := NewHoldout(d, 20)
			feed(t, l, p, 0, 200)
			for i := 200; i < 220; i++ {
				if err := h.Add(p.record(i)); err != nil {
					t.Fatal(err)
				}
			}
			l.Idle(50)
			before := l.Model(3)
			if before.Coef[1] == 0 {
				t.Fatal("feature 1 should be in the model before the reset")
			}
			l.ResetFeature(1)
			h.ResetFeature(1)
			for i := range l.Size() {
				m := l.Model(i)
				if m.Standardized[1] != 0 || m.Coef[1] != 0 || m.Mean[1] != 0 || m.Std[1] != 0 {
					t.Fatalf("member %d after reset: θ %v coef %v mean %v std %v", i, m.Standardized[1], m.Coef[1], m.Mean[1], m.Std[1])
				}
			}
			// A gram member read after a reset is solved again without the
			// column (its other coefficients move); its scale is untouched.
			if after := l.Model(3); after.Mean[0] != before.Mean[0] || after.Std[0] != before.Std[0] ||
				learner != "gram" && after.Standardized[0] != before.Standardized[0] {
				t.Fatal("reset touched another column")
			}
			if !l.Fresh(1) {
				t.Fatal("reset column not fresh")
			}
			for i := range h.Len() {
				if x, _, _ := h.At(i); !math.IsNaN(x[1]) {
					t.Fatalf("holdout record %d keeps %v", i, x[1])
				}
			}
			for i := 220; i < 400; i++ {
				r := p.record(i)
				if i < 300 {
					r.X[1] = math.NaN()
				}
				if err := l.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			if l.Fresh(1) {
				t.Fatal("column still fresh after values")
			}
			for _, s := range l.Score(h, nil) {
				if math.IsNaN(s.Loss) {
					t.Fatalf("NaN loss %+v", s)
				}
			}
		})
	}
}

// TestGrowState: a ladder that grew and reset a column round-trips
// bit-identically (width, maximum width, fresh columns) and continues as
// the original does.
func TestGrowState(t *testing.T) {
	for _, learner := range []string{"saga", "decay", "gram"} {
		t.Run(learner, func(t *testing.T) {
			const d = 6
			p := makeProblem(8, 300, d, 3, false, false)
			l, err := NewLadder(&Options{Features: 2, MaxFeatures: 10, Window: 64, Size: 3, Seed: 1, Learner: learner})
			if err != nil {
				t.Fatal(err)
			}
			add := func(l *Ladder, i int) {
				r := p.record(i)
				r.X = r.X[:l.Features()]
				if err := l.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			for i := range 50 {
				add(l, i)
			}
			l.Grow(d)
			for i := 50; i < 120; i++ {
				add(l, i)
			}
			l.ResetFeature(3)
			r := restore(t, l)
			if r.Features() != d || r.MaxFeatures() != 10 || !r.Fresh(3) || r.Fresh(0) {
				t.Fatalf("restored width %d max %d fresh %v", r.Features(), r.MaxFeatures(), r.fresh)
			}
			h := NewHoldout(d, 30)
			for i := 250; i < 280; i++ {
				if err := h.Add(p.record(i)); err != nil {
					t.Fatal(err)
				}
			}
			for i := 120; i < 200; i++ {
				add(l, i)
				add(r, i)
			}
			sameLadder(t, "continued", l, r, h)
		})
	}
}

// TestGrowPanics: growing past MaxFeatures or resetting a column out of
// range is a programmer error.
func TestGrowPanics(t *testing.T) {
	l, err := NewLadder(&Options{Features: 2, MaxFeatures: 3})
	if err != nil {
		t.Fatal(err)
	}
	for name, f := range map[string]func(){
		"grow":  func() { l.Grow(4) },
		"reset": func() { l.ResetFeature(2) },
		"hold":  func() { NewHoldout(2, 3).ResetFeature(-1) },
	} {
		t.Run(name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Fatal("no panic")
				}
			}()
			f()
		})
	}
	if _, err := NewLadder(&Options{Features: 3, MaxFeatures: 2}); err == nil {
		t.Fatal("MaxFeatures < Features accepted")
	}
}

// ExampleLadder_Grow grows a ladder when a second channel appears.
func ExampleLadder_Grow() {
	l, _ := NewLadder(&Options{Features: 1, MaxFeatures: 4, Lambda: 0.01, Seed: 1})
	for i := range 50 {
		_ = l.Add(Record{X: []float64{float64(i % 7)}, Y: float64(i % 7)})
	}
	l.Grow(2)
	fmt.Println(l.Features(), l.Fresh(1))
	_ = l.Add(Record{X: []float64{1, 3}, Y: 1})
	fmt.Println(l.Fresh(1))
	// Output:
	// 2 true
	// false
}

// TestCheck: Check refuses what Add refuses, for any width up to
// MaxFeatures, and changes nothing.
func TestCheck(t *testing.T) {
	l, err := NewLadder(&Options{Loss: Logistic{}, Features: 2, MaxFeatures: 4})
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		r    Record
		want error
	}{
		{"wider than now", Record{X: []float64{1, 2, 3, math.NaN()}, Y: 1}, nil},
		{"past the maximum", Record{X: make([]float64, 5), Y: 1}, ErrDimension},
		{"value beyond the bound", Record{X: []float64{1e60}, Y: 0}, ErrNotFinite},
		{"label outside the domain", Record{X: []float64{1}, Y: 2}, ErrLabel},
		{"negative weight", Record{X: []float64{1}, Y: 1, W: -1}, ErrWeight},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if err := l.Check(tc.r); !errors.Is(err, tc.want) || (tc.want == nil) != (err == nil) {
				t.Fatalf("got %v, want %v", err, tc.want)
			}
			if l.Features() != 2 || l.Len() != 0 {
				t.Fatal("Check changed the ladder")
			}
		})
	}
}
