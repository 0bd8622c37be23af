package online

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// stateCase is one setup of the save-and-restore tests.
type stateCase struct {
	name     string
	opt      Options
	logistic bool
	weighted bool
	nan      bool // some features missing
	timed    bool // records carry T (for a Span)
	prep     func(l *Ladder)
}

func stateCases() []stateCase {
	en := ElasticNet(0.5)
	ridge := Ridge()
	base := func(o Options) Options {
		o.Features, o.Window, o.Seed = 6, 120, 7
		if o.Size == 0 && o.Lambda == 0 && !o.Unpenalized {
			o.Size = 12
		}
		return o
	}
	return []stateCase{
		{name: "saga/squared/lasso/K12", opt: base(Options{})},
		{name: "saga/squared/lasso/K1", opt: base(Options{Lambda: 0.05})},
		{name: "saga/logistic/lasso/K12", opt: base(Options{Loss: Logistic{}}), logistic: true},
		{name: "saga/logistic/enet/K1", opt: base(Options{Loss: Logistic{}, Penalty: &en, Lambda: 0.01}), logistic: true},
		{name: "saga/squared/ridge/K12", opt: base(Options{Penalty: &ridge})},
		{name: "saga/squared/enet/K12/weighted", opt: base(Options{Penalty: &en}), weighted: true},
		{name: "saga/squared/K12/span", opt: base(Options{Span: 40 * time.Second}), timed: true},
		{name: "saga/logistic/K12/nan", opt: base(Options{Loss: Logistic{}}), logistic: true, nan: true},
		{name: "saga/squared/K1/nan/weighted", opt: base(Options{Lambda: 0.02, Steps: 3}), nan: true, weighted: true},
		{name: "saga/squared/K12/shrink", opt: base(Options{}), prep: func(l *Ladder) { l.Shrink(50) }},
		{name: "saga/squared/K12/idle", opt: base(Options{}), prep: func(l *Ladder) { l.Idle(37) }},
		{name: "saga/logistic/K12/converge", opt: base(Options{Loss: Logistic{}}), logistic: true,
			prep: func(l *Ladder) { l.Converge(1e-6, 30) }},
		{name: "saga/squared/K1/converge", opt: base(Options{Lambda: 0.05}), prep: func(l *Ladder) { l.Converge(1e-8, 30) }},
		{name: "saga/squared/ridge/K12/extended", opt: base(Options{Penalty: &ridge}),
			prep: func(l *Ladder) { l.Extend(11, 11); l.Extend(11, 11) }},
		{name: "saga/squared/lasso/K12/extended/converge", opt: base(Options{}),
			prep: func(l *Ladder) { l.Extend(11, 5); l.Converge(1e-8, 30) }},
		{name: "saga/squared/unpenalized", opt: base(Options{Unpenalized: true})},
		{name: "gram/squared/lasso/K12", opt: base(Options{Learner: "gram"})},
		{name: "gram/squared/enet/K12/weighted/nan", opt: base(Options{Learner: "gram", Penalty: &en}), weighted: true, nan: true},
		{name: "gram/squared/ridge/K12/extended", opt: base(Options{Learner: "gram", Penalty: &ridge}),
			prep: func(l *Ladder) { l.Extend(11, 11) }},
		{name: "gram/squared/K1/span/shrink", opt: base(Options{Learner: "gram", Lambda: 0.05, Span: 40 * time.Second}), timed: true,
			prep: func(l *Ladder) { l.Shrink(30) }},
		{name: "gram/squared/K12/converge", opt: base(Options{Learner: "gram"}), prep: func(l *Ladder) { l.Converge(1e-8, 30) }},
		{name: "decay/squared/lasso/K12", opt: base(Options{Learner: "decay", HalfLife: 200})},
		{name: "decay/logistic/enet/K1/nan", opt: base(Options{Learner: "decay", Loss: Logistic{}, Penalty: &en, Lambda: 0.01}),
			logistic: true, nan: true},
		{name: "decay/squared/ridge/K12/weighted/shrink", opt: base(Options{Learner: "decay", Penalty: &ridge}), weighted: true,
			prep: func(l *Ladder) { l.Shrink(40) }},
	}
}

// stateRecords returns the n records of case c (record i at T = i seconds
// when timed).
func (c stateCase) records(n int) []Record {
	p := makeProblem(3, n, c.opt.Features, 3, c.logistic, c.weighted)
	rs := make([]Record, n)
	for i := range rs {
		rs[i] = p.record(i)
		if c.nan && i%5 == 2 {
			rs[i].X[i%c.opt.Features] = math.NaN()
		}
		if c.timed {
			rs[i].T = int64(1000 * (i + 1))
		}
	}
	return rs
}

// sameBits reports whether a and b hold the same float64 bit patterns.
func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// modelBits returns every float of m in a fixed order.
func modelBits(m Model) []float64 {
	v := []float64{m.Penalty.Mix, m.Lambda, m.Intercept, m.StdIntercept, m.Weight}
	v = append(v, m.Coef...)
	v = append(v, m.Standardized...)
	v = append(v, m.Mean...)
	return append(v, m.Std...)
}

// scoreBits returns every float of the scores in order.
func scoreBits(ss []Score) []float64 {
	var v []float64
	for _, s := range ss {
		v = append(v, float64(s.Index), s.Lambda, float64(s.Nonzero), s.Loss, s.SE, s.AUC, s.Brier, s.LogLoss, s.RMSE, s.MAE, s.R2)
	}
	return v
}

// sameLadder fails t unless a and b agree bit for bit on everything they
// report, including their scores on h.
func sameLadder(t *testing.T, at string, a, b *Ladder, h *Holdout) {
	t.Helper()
	if a.Len() != b.Len() || a.Seen() != b.Seen() || a.Size() != b.Size() {
		t.Fatalf("%s: len %d/%d seen %d/%d size %d/%d", at, a.Len(), b.Len(), a.Seen(), b.Seen(), a.Size(), b.Size())
	}
	if !sameBits([]float64{a.LambdaMax()}, []float64{b.LambdaMax()}) {
		t.Fatalf("%s: λ_max %v != %v", at, a.LambdaMax(), b.LambdaMax())
	}
	if ga, gb := a.Grid(), b.Grid(); ga != gb {
		t.Fatalf("%s: grid %+v != %+v", at, ga, gb)
	}
	for i := range a.Size() {
		ma, mb := a.Model(i), b.Model(i)
		if ma.Records != mb.Records || ma.Seen != mb.Seen || ma.Loss != mb.Loss || !sameBits(modelBits(ma), modelBits(mb)) {
			t.Fatalf("%s: member %d differs:\n%+v\n%+v", at, i, ma, mb)
		}
		if ka, kb := a.KKT(i), b.KKT(i); math.Float64bits(ka) != math.Float64bits(kb) {
			t.Fatalf("%s: KKT(%d) %v != %v", at, i, ka, kb)
		}
	}
	if sa, sb := a.Score(h, nil), b.Score(h, nil); !sameBits(scoreBits(sa), scoreBits(sb)) {
		t.Fatalf("%s: scores differ:\n%+v\n%+v", at, sa, sb)
	}
}

// restore marshals l and returns the ladder restored from it, checking
// that the restored ladder marshals to the same bytes.
func restore(t *testing.T, l *Ladder) *Ladder {
	t.Helper()
	b, err := l.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	r, err := UnmarshalLadder(b)
	if err != nil {
		t.Fatal(err)
	}
	b2, err := r.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(b, b2) {
		t.Fatalf("re-encoding differs: %d vs %d bytes", len(b), len(b2))
	}
	return r
}

// TestLadderStateBitIdentical streams records into a ladder, restores a
// copy mid-stream, and feeds both the same continuation (records, Idle
// steps, a Shrink): they must agree bit for bit throughout.
func TestLadderStateBitIdentical(t *testing.T) {
	const mid, total = 230, 520
	for _, c := range stateCases() {
		t.Run(c.name, func(t *testing.T) {
			rs := c.records(total + 40)
			h := NewHoldout(c.opt.Features, 40)
			h.SetLoss(c.opt.Loss)
			for _, r := range rs[total:] {
				if err := h.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			a, err := NewLadder(&c.opt)
			if err != nil {
				t.Fatal(err)
			}
			add := func(l *Ladder, r Record) {
				if err := l.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			for _, r := range rs[:mid] {
				add(a, r)
			}
			if c.prep != nil {
				c.prep(a)
			}
			b := restore(t, a)
			sameLadder(t, "at restore", a, b, h)
			var zero Ladder
			if err := zero.UnmarshalBinary(must(a.MarshalBinary())); err != nil {
				t.Fatal(err)
			}
			for i := mid; i < total; i++ {
				add(a, rs[i])
				add(b, rs[i])
				switch {
				case i%53 == 0:
					a.Idle(5)
					b.Idle(5)
				case i == 400:
					a.Shrink(60)
					b.Shrink(60)
				case i == 450:
					b = restore(t, b) // a second restore of the copy
				}
				if i%40 == 0 || i == total-1 {
					sameLadder(t, fmt.Sprint("record ", i), a, b, h)
				}
			}
			// The ladder restored into a zero Ladder follows too.
			for i := mid; i < total; i++ {
				add(&zero, rs[i])
				switch {
				case i%53 == 0:
					zero.Idle(5)
				case i == 400:
					zero.Shrink(60)
				}
			}
			sameLadder(t, "zero ladder", a, &zero, h)
		})
	}
}

func must(b []byte, err error) []byte {
	if err != nil {
		panic(err)
	}
	return b
}

// TestLadderStateEmpty restores a ladder that has seen nothing.
func TestLadderStateEmpty(t *testing.T) {
	for _, learner := range []string{"saga", "decay"} {
		t.Run(learner, func(t *testing.T) {
			a, _ := NewLadder(&Options{Features: 3, Window: 10, Learner: learner, Seed: 5})
			b := restore(t, a)
			h := NewHoldout(3, 5)
			c := stateCase{opt: Options{Features: 3}}
			for i, r := range c.records(30) {
				if i < 5 {
					_ = h.Add(r)
				}
				_ = a.Add(r)
				_ = b.Add(r)
			}
			sameLadder(t, "after 30", a, b, h)
		})
	}
}

// TestLadderStateCustomLoss checks that a loss without a name cannot be
// saved.
func TestLadderStateCustomLoss(t *testing.T) {
	l, err := NewLadder(&Options{Features: 2, Loss: customLoss{}})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := l.MarshalBinary(); !errors.Is(err, ErrState) {
		t.Fatalf("err = %v, want ErrState", err)
	}
}

// customLoss is the squared loss under another type.
type customLoss struct{ Squared }

func (customLoss) Name() string { return "custom" }

// TestHoldoutState checks that a restored holdout scores as the original,
// before and after more records, a wrap of the ring and KeepNewest.
func TestHoldoutState(t *testing.T) {
	for _, c := range []stateCase{
		{name: "squared", opt: Options{Features: 4}, weighted: true},
		{name: "logistic/nan", opt: Options{Features: 4, Loss: Logistic{}}, logistic: true, nan: true},
	} {
		t.Run(c.name, func(t *testing.T) {
			rs := c.records(300)
			l, _ := NewLadder(&Options{Features: 4, Loss: c.opt.Loss, Window: 100, Seed: 2})
			for _, r := range rs[:200] {
				_ = l.Add(r)
			}
			for _, loss := range []Loss{nil, c.opt.Loss} {
				a := NewHoldout(4, 30)
				a.SetLoss(loss)
				for _, r := range rs[200:245] { // wraps the ring
					_ = a.Add(r)
				}
				var b Holdout
				if err := b.UnmarshalBinary(must(a.MarshalBinary())); err != nil {
					t.Fatal(err)
				}
				same := func(at string) {
					t.Helper()
					if a.Len() != b.Len() || a.Cap() != b.Cap() || a.Features() != b.Features() {
						t.Fatalf("%s: len %d/%d cap %d/%d", at, a.Len(), b.Len(), a.Cap(), b.Cap())
					}
					if sa, sb := l.Score(a, nil), l.Score(&b, nil); !sameBits(scoreBits(sa), scoreBits(sb)) {
						t.Fatalf("%s: scores differ:\n%+v\n%+v", at, sa, sb)
					}
					if !bytes.Equal(must(a.MarshalBinary()), must(b.MarshalBinary())) {
						t.Fatalf("%s: encodings differ", at)
					}
				}
				same("restored")
				for _, r := range rs[245:260] {
					ea, eb := a.Add(r), b.Add(r)
					if (ea == nil) != (eb == nil) {
						t.Fatalf("Add: %v vs %v", ea, eb)
					}
				}
				same("after adds")
				a.KeepNewest(11)
				b.KeepNewest(11)
				same("after KeepNewest")
			}
		})
	}
}

// TestChooserState checks that a restored chooser makes the same choices
// on the same scores, from every point of a sequence.
func TestChooserState(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 9))
	seq := make([][]Score, 60)
	for k := range seq {
		ss := make([]Score, 5)
		for i := range ss {
			ss[i] = Score{Index: i, Lambda: math.Pow(0.5, float64(i)), Loss: 1 + 0.1*r.Float64(), SE: 0.02 * r.Float64()}
		}
		if k%13 == 5 {
			ss = nil // no choice
		}
		seq[k] = ss
	}
	for _, rule := range []Rule{RuleMin, RuleOneSE} {
		for cut := range len(seq) {
			a := Chooser{Rule: rule}
			for _, ss := range seq[:cut] {
				a.Update(ss)
			}
			var b Chooser
			if err := b.UnmarshalBinary(must(a.MarshalBinary())); err != nil {
				t.Fatal(err)
			}
			for k, ss := range seq[cut:] {
				ia, ca := a.Update(ss)
				ib, cb := b.Update(ss)
				if ia != ib || ca != cb || a.Current() != b.Current() {
					t.Fatalf("%v cut %d step %d: (%d %v) vs (%d %v)", rule, cut, k, ia, ca, ib, cb)
				}
			}
		}
	}
}

// benchRestoreLadder returns a ladder of K members on d features whose
// window of n records has wrapped.
func benchRestoreLadder(b *testing.B, n, d, k int) *Ladder {
	l, err := NewLadder(&Options{Features: d, Window: n, Size: k, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	pool := benchPool(n+n/4, d)
	for _, r := range pool {
		_ = l.Add(r)
	}
	return l
}

// BenchmarkLadderRestore measures UnmarshalLadder for a full window of
// 10,000 records, d = 64, K = 12 (the daemon's default ladder), and a
// small K = 1 ladder; it reports the size of the encoding.
func BenchmarkLadderRestore(b *testing.B) {
	for _, sz := range []struct{ n, d, k int }{{10000, 64, 12}, {1000, 16, 1}} {
		b.Run(fmt.Sprintf("n%d/d%d/K%d", sz.n, sz.d, sz.k), func(b *testing.B) {
			enc := must(benchRestoreLadder(b, sz.n, sz.d, sz.k).MarshalBinary())
			b.SetBytes(int64(len(enc)))
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				if _, err := UnmarshalLadder(enc); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(enc)), "bytes")
		})
	}
}

// BenchmarkLadderMarshal measures MarshalBinary on the ladders of
// BenchmarkLadderRestore.
func BenchmarkLadderMarshal(b *testing.B) {
	for _, sz := range []struct{ n, d, k int }{{10000, 64, 12}, {1000, 16, 1}} {
		b.Run(fmt.Sprintf("n%d/d%d/K%d", sz.n, sz.d, sz.k), func(b *testing.B) {
			l := benchRestoreLadder(b, sz.n, sz.d, sz.k)
			var size int
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				size = len(must(l.MarshalBinary()))
			}
			b.ReportMetric(float64(size), "bytes")
		})
	}
}

// TestLadderStateVersion4 restores encodings of the previous format,
// version 4, which differs from version 5 only in the gram learner's solve
// flags: a SAGA and a decay ladder whose version byte says 4 restore to
// the same ladder, and a gram ladder written without the flags (every
// member solved, as version 4 kept them) restores with none stale and
// continues bit for bit with the ladder it was saved from.
func TestLadderStateVersion4(t *testing.T) {
	for _, c := range stateCases() {
		if c.prep != nil {
			continue
		}
		t.Run(c.name, func(t *testing.T) {
			rs := c.records(400)
			a, err := NewLadder(&c.opt)
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range rs[:300] {
				if err := a.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			a.Idle(1) // gram: every member solved, the state version 4 could hold
			v5 := must(a.MarshalBinary())
			v4 := bytes.Clone(v5)
			v4[0] = 4
			if g, ok := a.lrn.(*covLearner); ok {
				v4 = dropSolveFlags(t, v4, len(g.ms), a.Features())
			}
			b, err := UnmarshalLadder(v4)
			if err != nil {
				t.Fatal(err)
			}
			if again := must(b.MarshalBinary()); !bytes.Equal(again, v5) {
				t.Fatalf("version 4 restored and saved again: %d bytes differ from version 5's %d", len(again), len(v5))
			}
			for _, r := range rs[300:] {
				if err := a.Add(r); err != nil {
					t.Fatal(err)
				}
				if err := b.Add(r); err != nil {
					t.Fatal(err)
				}
			}
			if !bytes.Equal(must(a.MarshalBinary()), must(b.MarshalBinary())) {
				t.Fatal("the ladder restored from version 4 did not continue bit for bit")
			}
		})
	}
}

// dropSolveFlags rewrites the end of a gram ladder's encoding of k members
// of d < 128 features into version 4's layout: without the lazy flag
// (before the member count) and each member's stale flag (after its
// coefficients), which must all be false.
func dropSolveFlags(t *testing.T, b []byte, k, d int) []byte {
	t.Helper()
	size := 3*8 + 1 + 8*d + 1 // λ, b, KKT; θ with its length; stale
	tail := len(b) - k*size
	if tail < 2 || b[tail-1] != byte(k) || b[tail-2] != 0 {
		t.Fatalf("unexpected layout: member count %d, lazy %d", b[tail-1], b[tail-2])
	}
	out := append(bytes.Clone(b[:tail-2]), byte(k))
	for i := range k {
		m := b[tail+i*size : tail+(i+1)*size]
		if m[size-1] != 0 {
			t.Fatalf("member %d stale", i)
		}
		out = append(out, m[:size-1]...)
	}
	return out
}
