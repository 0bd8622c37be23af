package online

import (
	"errors"
	"math"
	"testing"
	"time"
)

// sameFit compares every member of two ladders: λ to 1e-9 relative, θ and
// b to tol relative.
func sameFit(t *testing.T, a, b *Ladder, tol float64) {
	t.Helper()
	for i := range a.Size() {
		if math.Abs(a.Lambda(i)-b.Lambda(i)) > 1e-9*b.Lambda(i) {
			t.Errorf("member %d: λ %v vs %v", i, a.Lambda(i), b.Lambda(i))
		}
		ma, mb := a.Model(i), b.Model(i)
		if e := relErr(append(ma.Standardized, ma.StdIntercept), append(mb.Standardized, mb.StdIntercept)); e > tol {
			t.Errorf("member %d: rel err %g", i, e)
		}
	}
}

// TestSlidingEqualsBatch: after the window slides (count eviction, then
// span eviction), the converged streaming ladder equals a fresh ladder fed
// only the window's current records and converged — the windowed objective
// is exactly F on the window (README.md, "The objective"; the fresh batch
// fit is the reference).
func TestSlidingEqualsBatch(t *testing.T) {
	for _, tc := range []struct {
		name     string
		logistic bool
		mix      float64
		span     bool
	}{
		{"lasso/count", false, 1, false},
		{"enet/count/logistic", true, 0.5, false},
		{"ridge/span", false, 0, true},
		{"lasso/span/logistic", true, 1, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			const n, window = 700, 200
			p := makeProblem(12, n, 6, 3, tc.logistic, true)
			var loss Loss = Squared{}
			if tc.logistic {
				loss = Logistic{}
			}
			o := Options{Features: 6, Window: window, Size: 4, Floor: 0.01, Loss: loss, Penalty: &Penalty{Mix: tc.mix}, Seed: 3}
			from := n - window
			if tc.span {
				o.Window, o.Span = 10000, 150*time.Second
				from = n - 151 // T_i = i seconds: T ≥ newest − 150 s keeps 151 records
			}
			l, _ := NewLadder(&o)
			for i := range n {
				r := p.record(i)
				r.T = int64(i+1) * 1000
				if err := l.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			if l.Len() != n-from {
				t.Fatalf("window %d records, want %d", l.Len(), n-from)
			}
			fresh, _ := NewLadder(&o)
			for i := from; i < n; i++ {
				r := p.record(i)
				r.T = int64(i+1) * 1000
				_ = fresh.Add(r)
			}
			if !l.Converge(1e-9, 200) || !fresh.Converge(1e-9, 200) {
				t.Fatalf("not converged: %g %g", l.KKT(3), fresh.KKT(3))
			}
			sameFit(t, l, fresh, 1e-6)
		})
	}
}

// TestIdleConverges: idle SAGA steps alone (no polish) drive a ridge fit to
// KKT ≤ 1e-6; SAGA converges linearly on strongly convex problems
// (Defazio, Bach & Lacoste-Julien 2014, Theorem 1).
func TestIdleConverges(t *testing.T) {
	p := makeProblem(2, 300, 5, 5, false, false)
	l, _ := NewLadder(&Options{Features: 5, Window: 300, Penalty: &Penalty{Mix: 0}, Lambda: 0.05, Seed: 9})
	feed(t, l, p, 0, 300)
	before := l.KKT(0)
	l.Idle(300 * 300)
	if after := l.KKT(0); after > 1e-6 || after >= before {
		t.Errorf("KKT %g before, %g after idle", before, after)
	}
}

// TestDeterministic: the same seed and records give bit-identical models
// (math.Float64bits); another seed gives a different trajectory.
func TestDeterministic(t *testing.T) {
	p := makeProblem(13, 500, 8, 4, true, true)
	run := func(seed uint64) *Ladder {
		l, _ := NewLadder(&Options{Features: 8, Window: 128, Size: 5, Loss: Logistic{}, Seed: seed})
		feed(t, l, p, 0, 500)
		l.Idle(300)
		return l
	}
	a, b, c := run(1), run(1), run(2)
	differs := false
	for i := range a.Size() {
		ma, mb, mc := a.Model(i), b.Model(i), c.Model(i)
		for j := range ma.Standardized {
			if math.Float64bits(ma.Standardized[j]) != math.Float64bits(mb.Standardized[j]) {
				t.Fatalf("member %d θ_%d: %v vs %v", i, j, ma.Standardized[j], mb.Standardized[j])
			}
			differs = differs || ma.Standardized[j] != mc.Standardized[j]
		}
		if math.Float64bits(ma.StdIntercept) != math.Float64bits(mb.StdIntercept) {
			t.Fatalf("member %d intercept differs", i)
		}
	}
	if !differs {
		t.Error("seeds 1 and 2 gave identical models")
	}
}

// TestShrink: Shrink keeps the newest n records; the converged fit equals a
// fresh fit on those records.
func TestShrink(t *testing.T) {
	p := makeProblem(14, 400, 5, 3, false, false)
	o := Options{Features: 5, Window: 300, Size: 3, Seed: 1}
	l, _ := NewLadder(&o)
	feed(t, l, p, 0, 400)
	l.Shrink(120)
	if l.Len() != 120 || l.Seen() != 400 {
		t.Fatalf("Len %d Seen %d", l.Len(), l.Seen())
	}
	fresh, _ := NewLadder(&o)
	feed(t, fresh, p, 280, 400)
	if !l.Converge(1e-9, 100) || !fresh.Converge(1e-9, 100) {
		t.Fatal("not converged")
	}
	sameFit(t, l, fresh, 1e-6)
}

// TestAddRejects: every invalid record returns its sentinel error, wrapped
// with detail, and changes nothing.
func TestAddRejects(t *testing.T) {
	for _, tc := range []struct {
		name string
		loss Loss
		r    Record
		want error
	}{
		{"dimension", nil, Record{X: []float64{1}, Y: 1}, ErrDimension},
		{"inf-feature", nil, Record{X: []float64{1, math.Inf(1)}, Y: 1}, ErrNotFinite},
		{"huge-feature", nil, Record{X: []float64{1e60, 1}, Y: 1}, ErrNotFinite},
		{"nan-label", nil, Record{X: []float64{1, 2}, Y: math.NaN()}, ErrNotFinite},
		{"logistic-label", Logistic{}, Record{X: []float64{1, 2}, Y: 0.5}, ErrLabel},
		{"negative-weight", nil, Record{X: []float64{1, 2}, Y: 1, W: -1}, ErrWeight},
		{"nan-weight", nil, Record{X: []float64{1, 2}, Y: 1, W: math.NaN()}, ErrWeight},
		{"inf-weight", nil, Record{X: []float64{1, 2}, Y: 1, W: math.Inf(1)}, ErrWeight},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l, _ := NewLadder(&Options{Features: 2, Loss: tc.loss, Size: 2})
			for i := range 40 {
				_ = l.Add(Record{X: []float64{float64(i % 7), float64(i % 3)}, Y: float64(i % 2)})
			}
			before := l.Model(1)
			err := l.Add(tc.r)
			if !errors.Is(err, tc.want) || err.Error() == tc.want.Error() {
				t.Fatalf("err %v, want wrapped %v", err, tc.want)
			}
			after := l.Model(1)
			if l.Seen() != 40 || l.Len() != 40 || after.Intercept != before.Intercept || after.Mean[0] != before.Mean[0] {
				t.Error("rejected record changed the ladder")
			}
		})
	}
}

// TestMissingImputed: a missing value is imputed with the feature's current
// window mean (it leaves the mean unchanged), and contributes 0 to Eta and
// Model.Eta.
func TestMissingImputed(t *testing.T) {
	p := makeProblem(15, 100, 3, 3, false, false)
	l, _ := NewLadder(&Options{Features: 3, Window: 1000, Size: 2})
	feed(t, l, p, 0, 100)
	mean := l.lrn.(*sagaLearner).ts.sc.mean[1]
	if err := l.Add(Record{X: []float64{1, math.NaN(), 2}, Y: 1}); err != nil {
		t.Fatal(err)
	}
	if got := l.lrn.(*sagaLearner).ts.sc.mean[1]; math.Abs(got-mean) > 1e-12*math.Abs(mean) {
		t.Errorf("mean moved from %v to %v", mean, got)
	}
	l.Converge(1e-9, 50)
	m := l.Model(1)
	x := []float64{0.5, math.NaN(), -1}
	xm := []float64{0.5, m.Mean[1], -1}
	if a, b, c := l.Eta(1, x), m.Eta(x), l.Eta(1, xm); math.Abs(a-b) > 1e-9 || math.Abs(a-c) > 1e-9 {
		t.Errorf("Eta with NaN %v, Model.Eta %v, at the mean %v", a, b, c)
	}
}

// TestConstantFeature: a constant feature gets coefficient 0 and no
// division by zero: a feature with s_j = 0 carries no information and its
// raw coefficient θ_j / s_j is defined as 0 rather than computed.
func TestConstantFeature(t *testing.T) {
	p := makeProblem(16, 200, 4, 4, false, false)
	for i := range p.x {
		p.x[i][2] = 7.5
	}
	l := fit(t, p, 200, Options{Size: 3})
	for i := range l.Size() {
		m := l.Model(i)
		if m.Standardized[2] != 0 || m.Coef[2] != 0 || m.Std[2] != 0 {
			t.Errorf("member %d: constant feature θ %v coef %v std %v", i, m.Standardized[2], m.Coef[2], m.Std[2])
		}
		for _, v := range append(m.Coef, m.Intercept) {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite coefficient %v", v)
			}
		}
	}
}

// TestAddAllocs: Add, Ready and reads of a member (Eta) allocate nothing
// per record, through evictions, refreshes and resyncs, for every learner
// (testing.AllocsPerRun).
func TestAddAllocs(t *testing.T) {
	p := makeProblem(17, 64, 10, 3, false, false)
	ridge := Ridge()
	for _, tc := range []struct {
		learner string
		pen     *Penalty
	}{{"saga", nil}, {"decay", nil}, {"gram", nil}, {"saga", &ridge}, {"decay", &ridge}, {"gram", &ridge}} {
		learner := tc.learner
		if tc.pen != nil {
			learner += "/ridge" // the df anchor's spectrum runs on the record path
		}
		l, _ := NewLadder(&Options{Features: 10, Window: 50, Learner: tc.learner, Penalty: tc.pen, Span: time.Minute})
		i := 0
		add := func() {
			r := p.record(i % 64)
			r.T = int64(i) * 100
			l.Ready(i % l.Size())      // the gram learner solves a stale member
			_ = l.Eta(i%l.Size(), r.X) // and a read of one (Ready's other member) solves a copy
			_ = l.Eta((i+1)%l.Size(), r.X)
			_ = l.Add(r)
			i++
		}
		for range 200 {
			add()
		}
		if a := testing.AllocsPerRun(2000, add); a != 0 {
			t.Errorf("%s: %v allocs per Add", learner, a)
		}
	}
}

// TestModelRawUnits: the raw-unit snapshot predicts exactly what the
// standardized member does: Coef = θ/s, Intercept = b − Σ θμ/s.
func TestModelRawUnits(t *testing.T) {
	p := makeProblem(18, 300, 6, 3, true, true)
	l := fit(t, p, 300, Options{Loss: Logistic{}, Size: 4})
	for i := range l.Size() {
		m := l.Model(i)
		for k := range 20 {
			if a, b := l.Eta(i, p.x[k]), m.Eta(p.x[k]); math.Abs(a-b) > 1e-9*(1+math.Abs(a)) {
				t.Fatalf("member %d record %d: Eta %v, Model.Eta %v", i, k, a, b)
			}
		}
		if m.Records != 300 || m.Seen != 300 || m.Loss != "logistic" || m.Index != i || m.Nonzero() != l.Nonzero(i) {
			t.Errorf("snapshot fields %+v", m)
		}
	}
}
