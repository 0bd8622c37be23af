package pipeline

import (
	"errors"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/window"
)

// sparseStream is a linear stream y = 2·x1 − 1.5·x3 + N(0, 0.5²) over
// x ~ N(0, I_d): two informative features of d (a constructed stream, no
// published source).
type sparseStream struct{ rng *rand.Rand }

func (s *sparseStream) next(x []float64) float64 {
	for j := range x {
		x[j] = s.rng.NormFloat64()
	}
	return 2*x[0] - 1.5*x[2] + 0.5*s.rng.NormFloat64()
}

// TestPipelineRoutesLikeLadder runs a stream through the Pipeline and the
// same records through a bare online.Ladder and online.Holdout split by
// the same window.Splitter: the pipeline must hold exactly the records the
// split routes to each side, and every ladder member must be bit for bit
// the bare ladder's (the pipeline adds policy, never a change to the
// learner's input; its one change to the ladder, moving the grid down at
// a retune whose held-out minimum sits at the smallest λ, is mirrored here
// with the same chooser and online.Ladder.Extend). Source: the routing
// rule of README.md, "Choosing λ on held-out data" (every k-th record held
// out), no external source.
func TestPipelineRoutesLikeLadder(t *testing.T) {
	m := driftModel("route", config.LossSquared, featureNames(8), 1500)
	h := newHarness(t, m)
	h64 := fnv.New64a()
	h64.Write([]byte(m.Name))
	bare, err := online.NewLadder(&online.Options{
		Loss: online.Squared{}, Penalty: &online.Penalty{Mix: 1}, Features: 8,
		Window: m.Window.Records, Size: m.Ladder.Size, Floor: m.Ladder.Floor,
		Steps: m.Learner.Steps, Seed: h64.Sum64(), Learner: m.Learner.EffectiveKind(m.Loss), HalfLife: m.Learner.HalfLife,
	})
	if err != nil {
		t.Fatal(err)
	}
	hold := online.NewHoldout(8, m.Holdout.Records)
	split := window.Splitter{Every: m.Holdout.Every}
	s := &sparseStream{rng: rand.New(rand.NewPCG(3, 4))}
	x := make([]float64, 8)
	const n = 4000
	rule, err := online.ParseRule(m.Retune.Rule)
	if err != nil {
		t.Fatal(err)
	}
	chooser, moved := online.Chooser{Rule: rule}, 0
	for i := range n {
		y := s.next(x)
		h.feed(x, y)
		// The pipeline readies the current member before it learns (the
		// test-then-train loss), which solves it when stale (gram).
		bare.Ready(max(chooser.Current(), 0))
		r := online.Record{X: x, Y: y, W: 1}
		if split.Holdout(uint64(i), nil) {
			err = hold.Add(r)
		} else {
			err = bare.Add(r)
		}
		if err != nil {
			t.Fatal(err)
		}
		if (i+1)%m.Retune.Every == 0 {
			// The pipeline scores the members' exact fits (Ladder.OptimumPath
			// for the squared loss) at every retune for the gram learner, and
			// else at every retune of the first window and then once per
			// window length of records (exactDue), and the streaming members
			// in between, so the mirror does too.
			seq, since, wn := i+1, m.Retune.Every, m.Window.Records
			var scores []online.Score
			if bare.Learner() == config.LearnerGram || seq <= wn || seq/wn != (seq-since)/wn {
				var fits []online.Model
				for _, o := range bare.OptimumPath(nil, nil) {
					fits = append(fits, o.Model)
				}
				scores = bare.ScoreModels(hold, fits, nil)
			} else {
				scores = bare.Score(hold, nil)
			}
			idx, _ := chooser.Update(scores)
			if k := bare.Extend(online.Choose(scores, online.RuleMin), idx); k != 0 {
				chooser.Shift(-k, bare.Size())
				moved++
			}
		}
	}
	t.Logf("grid moved %d times", moved)
	applied, held := h.p.Counts()
	if applied != n || held != n/5 || h.p.HeldOutLen() != hold.Len() {
		t.Fatalf("applied %d held out %d (ring %d), want %d and %d (ring %d)", applied, held, h.p.HeldOutLen(), n, n/5, hold.Len())
	}
	for i := range bare.Size() {
		a, b := h.p.Ladder().Model(i), bare.Model(i)
		if math.Float64bits(a.Intercept) != math.Float64bits(b.Intercept) {
			t.Fatalf("member %d: intercept %v, bare ladder %v", i, a.Intercept, b.Intercept)
		}
		for j := range a.Coef {
			if math.Float64bits(a.Coef[j]) != math.Float64bits(b.Coef[j]) {
				t.Fatalf("member %d coefficient %d: %v, bare ladder %v", i, j, a.Coef[j], b.Coef[j])
			}
		}
	}
	// The chosen member keeps both informative features.
	snap := h.publish()
	if snap == nil {
		t.Fatal("nothing to publish after 4000 records")
	}
	if snap.Doc.Coefficients["x01"] == 0 || snap.Doc.Coefficients["x03"] == 0 {
		t.Errorf("support %v misses x01 or x03", snap.Doc.Coefficients)
	}
}

// TestPipelineRefusesWithoutChange: a record the learner refuses gives a
// *record.Error with the reject reason and leaves the ladder, the held-out
// ring and the counts exactly as they were.
func TestPipelineRefusesWithoutChange(t *testing.T) {
	m := driftModel("refuse", config.LossLogistic, featureNames(3), 500)
	h := newHarness(t, m)
	s := newSEA(1, 8, 0.1)
	x := make([]float64, 3)
	for range 700 {
		h.feed(x, s.next(x))
	}
	cases := []struct {
		name   string
		x      []float64
		y, w   float64
		reason string
	}{
		{"label outside {0,1}", []float64{1, 2, 3}, 2, 1, record.ReasonLabel},
		{"infinite feature", []float64{math.Inf(1), 2, 3}, 1, 1, record.ReasonNotFinite},
		{"huge feature", []float64{1e60, 2, 3}, 1, 1, record.ReasonNotFinite},
		{"negative weight", []float64{1, 2, 3}, 1, -1, record.ReasonWeight},
		{"long record", []float64{1, 2, 3, 4}, 1, 1, record.ReasonDimension},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			before := ladderBits(h.p.Ladder())
			applied, held := h.p.Counts()
			// Both sides of the split: the next record and the one after.
			for range 5 {
				rec := record.Record{X: tc.x, Y: tc.y, W: tc.w}
				_, err := h.p.Apply(&rec, h.names, h.now)
				var re *record.Error
				if !errors.As(err, &re) || re.Reason != tc.reason {
					t.Fatalf("error %v, want reason %s", err, tc.reason)
				}
			}
			a2, h2 := h.p.Counts()
			if a2 != applied || h2 != held {
				t.Errorf("counts moved: %d/%d → %d/%d", applied, held, a2, h2)
			}
			if after := ladderBits(h.p.Ladder()); after != before {
				t.Error("ladder changed")
			}
		})
	}
}

// ladderBits hashes every member's intercept and coefficients bit for bit.
func ladderBits(l *online.Ladder) uint64 {
	h := fnv.New64a()
	var b [8]byte
	put := func(v float64) {
		u := math.Float64bits(v)
		for i := range b {
			b[i] = byte(u >> (8 * i))
		}
		h.Write(b[:])
	}
	for i := range l.Size() {
		m := l.Model(i)
		put(m.Intercept)
		for _, c := range m.Standardized {
			put(c)
		}
	}
	put(float64(l.Len()))
	return h.Sum64()
}

// TestPipelinePublish checks the publication rules of Publish (README.md,
// "Subjects": a version on every material change, at most one per second,
// at least every heartbeat, monotone across restarts).
func TestPipelinePublish(t *testing.T) {
	m := driftModel("publish", config.LossSquared, featureNames(4), 1000)
	m.Retune.Every = 100
	h := newHarness(t, m)
	t0 := time.Unix(2e9, 0)
	if s, err := h.p.Publish(t0, 0, true); s != nil || err != nil {
		t.Fatalf("published %v (%v) before any record", s, err)
	}
	s := &sparseStream{rng: rand.New(rand.NewPCG(5, 6))}
	x := make([]float64, 4)
	for range 99 {
		h.feed(x, s.next(x))
	}
	if s, _ := h.p.Publish(t0, 0, true); s != nil {
		t.Fatal("published before λ* was chosen")
	}
	h.feed(x, s.next(x)) // the 100th record retunes
	h.p.RaiseVersion(41) // the key-value bucket held version 41
	first, err := h.p.Publish(t0, 7, false)
	if err != nil || first == nil {
		t.Fatalf("first publication: %v, %v", first, err)
	}
	if first.Doc.Version != 42 || first.Doc.Records.Rejected != 7 || len(first.Names) != 4 {
		t.Errorf("first version %d rejected %d names %v", first.Doc.Version, first.Doc.Records.Rejected, first.Names)
	}
	for range 400 {
		h.feed(x, s.next(x))
	}
	if got, _ := h.p.Publish(t0.Add(500*time.Millisecond), 7, false); got != nil {
		t.Error("a second version within MinPublish")
	}
	next, _ := h.p.Publish(t0.Add(2*time.Second), 7, false)
	if next == nil || next.Doc.Version != 43 {
		t.Fatalf("changed model after 2 s: %+v, want version 43", next)
	}
	if got, _ := h.p.Publish(t0.Add(4*time.Second), 7, false); got != nil {
		t.Error("an unchanged model republished before the heartbeat")
	}
	beat, _ := h.p.Publish(t0.Add(2*time.Second+m.Publish.Heartbeat.Std()), 7, false)
	if beat == nil || beat.Doc.Version != 44 {
		t.Errorf("heartbeat: %+v, want version 44", beat)
	}
	forced, _ := h.p.Publish(t0.Add(2*time.Second+m.Publish.Heartbeat.Std()), 7, true)
	if forced == nil || forced.Doc.Version != 45 || h.p.Version() != 45 {
		t.Errorf("forced: %+v, want version 45", forced)
	}
	doc, _ := h.p.Document(t0, 7)
	if doc == nil || doc.Doc.Version != 45 {
		t.Errorf("Document: %+v, want the current version 45 unpublished", doc)
	}
}

// TestPipelineApplyAllocs: applying a record does not allocate in steady
// state (DEVELOPERS.md: allocations per record are asserted, 0), retunes
// aside, for the logistic loss (saga) and the squared loss (gram, whose
// member solves every 32 records are on the record path).
func TestPipelineApplyAllocs(t *testing.T) {
	for _, loss := range []string{config.LossLogistic, config.LossSquared} {
		t.Run(loss, func(t *testing.T) {
			m := driftModel("allocs", loss, featureNames(6), 2000)
			h := newHarness(t, m)
			if want := m.Learner.EffectiveKind(loss); h.p.ladder.Learner() != want {
				t.Fatalf("learner %s, want %s", h.p.ladder.Learner(), want)
			}
			s := &sparseStream{rng: rand.New(rand.NewPCG(7, 8))}
			label := func(v float64) float64 {
				if loss == config.LossSquared {
					return v
				}
				if v > 0 {
					return 1
				}
				return 0
			}
			x := make([]float64, 6)
			for range 3000 {
				h.feed(x, label(s.next(x)))
			}
			h.p.cfg.Retune.Every = math.MaxInt32 // the per-retune work allocates by design
			h.p.watch.retuneEvery = math.MaxInt32
			rec := record.Record{X: make([]float64, 6), W: 1}
			allocs := testing.AllocsPerRun(2000, func() {
				rec.Y = label(s.next(rec.X))
				if _, err := h.p.Apply(&rec, h.names, h.now); err != nil {
					t.Fatal(err)
				}
			})
			if allocs != 0 {
				t.Errorf("Apply allocates %v per record", allocs)
			}
		})
	}
}

// BenchmarkPipelineApply measures the per-record cost of the whole
// pipeline with the daemon's default model settings (window 10000, K = 12,
// squared loss, so the gram learner with an exact fit of every member at
// every retune; holdout every 5th, retune every 500, drift watch on) at
// d = 16, 64 and 128, against the same pipeline with learner saga (2 steps
// per record, the default before gram) and the bare SAGA ladder's Add on
// the same records (in the same run); and with drift.adapt off (no loss
// trail of the change-point estimate). default-vs-saga runs the default
// (a) and the saga pipeline (b) in alternating chunks and reports a/b.
func BenchmarkPipelineApply(b *testing.B) {
	for _, d := range []int{16, 64, 128} {
		m := config.DefaultModel()
		m.Name, m.Subject = "bench", "bench"
		m.Features, m.MaxFeatures = featureNames(d), d
		xs := make([][]float64, 4096)
		ys := make([]float64, len(xs))
		s := &sparseStream{rng: rand.New(rand.NewPCG(1, 2))}
		for i := range xs {
			xs[i] = make([]float64, d)
			ys[i] = s.next(xs[i])
		}
		off := m
		off.Drift.Adapt = false // no loss trail: its cost per record is the difference
		saga := m
		saga.Learner.Kind = config.LearnerSAGA // the pipeline before the gram default
		for _, v := range []struct {
			name string
			m    config.Model
		}{{"pipeline", m}, {"pipeline-saga", saga}, {"pipeline-adapt-off", off}} {
			benchPipeline(b, v.name+"/d="+strconv.Itoa(d), v.m, xs, ys)
		}
		benchInterleaved(b, "default-vs-saga/d="+strconv.Itoa(d), m, saga, xs, ys)
		b.Run("ladder/d="+strconv.Itoa(d), func(b *testing.B) {
			l, err := online.NewLadder(&online.Options{Features: d, Window: m.Window.Records, Seed: 1})
			if err != nil {
				b.Fatal(err)
			}
			for i := range 12000 {
				l.Add(online.Record{X: xs[i&4095], Y: ys[i&4095]})
			}
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				if err := l.Add(online.Record{X: xs[i&4095], Y: ys[i&4095]}); err != nil {
					b.Fatal(err)
				}
				i++
			}
		})
	}
}

// benchInterleaved measures Pipeline.Apply per record for models a and b
// on the same records, in alternating chunks of 64 records after a warm-up
// of 12,000 each, so that the load of a shared machine hits both alike;
// it reports both costs and their ratio a/b.
func benchInterleaved(b *testing.B, name string, ma, mb config.Model, xs [][]float64, ys []float64) {
	b.Run(name, func(b *testing.B) {
		ha, hb := newHarness(b, ma), newHarness(b, mb)
		for i := range 12000 {
			ha.feed(xs[i&4095], ys[i&4095])
			hb.feed(xs[i&4095], ys[i&4095])
		}
		rec := record.Record{W: 1}
		run := func(h *harness, from, n int) time.Duration {
			t0 := time.Now()
			for i := from; i < from+n; i++ {
				rec.X, rec.Y = xs[i&4095], ys[i&4095]
				if _, err := h.p.Apply(&rec, h.names, h.now); err != nil {
					b.Fatal(err)
				}
			}
			return time.Since(t0)
		}
		var ta, tb time.Duration
		b.ResetTimer()
		for done := 0; done < b.N; {
			c := min(64, b.N-done)
			ta += run(ha, done, c)
			tb += run(hb, done, c)
			done += c
		}
		na, nb := float64(ta.Nanoseconds())/float64(b.N), float64(tb.Nanoseconds())/float64(b.N)
		b.ReportMetric(na, "a-ns/rec")
		b.ReportMetric(nb, "b-ns/rec")
		b.ReportMetric(na/nb, "a/b")
	})
}

// benchPipeline measures Pipeline.Apply per record for model m after a
// warm-up of 12,000 records, cycling through xs and ys.
func benchPipeline(b *testing.B, name string, m config.Model, xs [][]float64, ys []float64) {
	b.Run(name, func(b *testing.B) {
		h := newHarness(b, m)
		for i := range 12000 {
			h.feed(xs[i&4095], ys[i&4095])
		}
		rec := record.Record{W: 1}
		b.ReportAllocs()
		i := 0
		for b.Loop() {
			rec.X, rec.Y = xs[i&4095], ys[i&4095]
			if _, err := h.p.Apply(&rec, h.names, h.now); err != nil {
				b.Fatal(err)
			}
			i++
		}
	})
}
