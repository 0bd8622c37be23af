package pipeline

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/plant"
	"lariat/daemon/record"
)

// guardRun feeds records to a pipeline and counts what the guard did: the
// records it rejected (by reason) and the largest |x − μ|/σ it saw on a
// warm channel or label, which is the margin below guard.sd.
type guardRun struct {
	t       testing.TB
	p       *Pipeline
	trips   map[string]int
	records int
	maxZ    float64
}

func newGuardRun(t testing.TB, p *Pipeline) *guardRun {
	return &guardRun{t: t, p: p, trips: map[string]int{}}
}

// apply applies rec; any rejection other than the guard's fails the test.
func (r *guardRun) apply(rec *record.Record, names []string) {
	r.t.Helper()
	r.records++
	g := r.p.guard
	for len(rec.X) < r.p.Width() {
		rec.X = append(rec.X, math.NaN())
	}
	g.resolve(names)
	for j, v := range rec.X {
		r.maxZ = max(r.maxZ, g.z(&g.cols[j], v))
	}
	if g.labelSD {
		r.maxZ = max(r.maxZ, g.z(&g.y, rec.Y))
	}
	_, err := r.p.Apply(rec, names, time.Unix(1e9, 0))
	var re *record.Error
	switch {
	case err == nil:
	case errors.As(err, &re) && (re.Reason == record.ReasonImplausible || re.Reason == record.ReasonOutOfRange):
		r.trips[re.Reason]++
	default:
		r.t.Fatalf("record %d: %v", r.records, err)
	}
}

// z returns |v − μ|/σ of a warm, unbounded channel (0 otherwise).
func (g *guard) z(c *gstat, v float64) float64 {
	if c.fixed || c.n < g.warm || v != v {
		return 0
	}
	return math.Abs(v-c.mean) / math.Sqrt(c.vr)
}

// guardRunRecords is the length of each run of TestGuardNeverTrips
// (messages for the plant, which splits them between its two models);
// guard_soak_test.go raises it under -tags soak.
var guardRunRecords = 20_000

// TestGuardNeverTrips runs the default guard over long runs of the demo
// plant (both demo models, through the record decoder, with the bearing
// fault), the recorded demo stream, and every stream generator of the drift
// tests, abrupt concept changes and gradual drift included: the guard must
// never reject a record of a real or simulated process. The figures (and
// the largest |x − μ|/σ seen, the margin below guard.sd = 1000) are in the
// README.
func TestGuardNeverTrips(t *testing.T) {
	n := guardRunRecords
	if testing.Short() {
		n = 5_000
	}
	cfg, err := config.Demo()
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		run  func(t *testing.T) *guardRun
	}{
		{"plant pump-trip", func(t *testing.T) *guardRun { return plantRun(t, cfg, "pump-trip", n) }},
		{"plant bearing-temp", func(t *testing.T) *guardRun { return plantRun(t, cfg, "bearing-temp", n) }},
		{"demo-stream.jsonl", func(t *testing.T) *guardRun { return streamFileRun(t, cfg) }},
		{"SEA, concepts switching, 10% noise", func(t *testing.T) *guardRun {
			s := newSEA(1, 8, 0.1)
			return genRun(t, "sea", config.LossLogistic, 3, n, func(i int, x []float64) float64 {
				s.theta = seaThetas[(i/5000)%len(seaThetas)]
				return s.next(x)
			})
		}},
		{"rotating hyperplane", func(t *testing.T) *guardRun {
			h := newHyperplane(1, 5, 0.01, 0.05)
			return genRun(t, "hyper", config.LossLogistic, 5, n, func(_ int, x []float64) float64 { return h.next(x) })
		}},
		{"Friedman #1", func(t *testing.T) *guardRun {
			f := newFriedman1(1, 1)
			return genRun(t, "fried", config.LossSquared, 10, n, func(_ int, x []float64) float64 { return f.next(x) })
		}},
		{"support switch", func(t *testing.T) *guardRun {
			s := &switchStream{rng: rand.New(rand.NewPCG(1, 2))}
			return genRun(t, "switch", config.LossSquared, 5, n, func(i int, x []float64) float64 {
				s.k = (i / 10000) % 2 * 2
				return s.next(x)
			})
		}},
		{"mean steps of 5 sd", func(t *testing.T) *guardRun {
			// A constructed stream (no published source): x ~ N(μ, I) with μ
			// stepping by 5 standard deviations every 5000 records, y linear.
			rng := rand.New(rand.NewPCG(1, 3))
			return genRun(t, "steps", config.LossSquared, 4, n, func(i int, x []float64) float64 {
				mu := 5 * float64((i/5000)%4)
				for j := range x {
					x[j] = mu + rng.NormFloat64()
				}
				return 3*x[0] - x[1] + rng.NormFloat64()
			})
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r := tc.run(t)
			t.Logf("%d records, %d rejected by the guard, largest |x − μ|/σ %.1f", r.records, r.trips[record.ReasonImplausible], r.maxZ)
			if len(r.trips) != 0 {
				t.Errorf("guard rejected %v", r.trips)
			}
			if r.records == 0 || r.maxZ == 0 {
				t.Errorf("the guard saw nothing: %d records, largest z %v", r.records, r.maxZ)
			}
		})
	}
}

// plantRun runs n messages of the demo plant (its fault after a quarter of
// them) through the decoder and the pipeline of demo model name.
func plantRun(t *testing.T, cfg *config.Config, name string, n int) *guardRun {
	m, _ := cfg.Model(name)
	p, err := New(Options{Model: m})
	if err != nil {
		t.Fatal(err)
	}
	dec := record.NewDecoder(&record.DecoderOptions{Features: m.Features, MaxFeatures: p.Width(), Logistic: m.Logistic(), Missing: m.Missing})
	want := "trip"
	if !m.Logistic() {
		want = "temp"
	}
	pl := plant.New(&plant.Options{Seed: 7, FaultAfter: time.Duration(n/4) * time.Second / 200,
		TripSubject: func(string) string { return "trip" }, TempSubject: func(string) string { return "temp" }}, time.Unix(0, 0))
	r := newGuardRun(t, p)
	var rec record.Record
	for range n {
		subj, msg := pl.Next()
		if subj != want {
			continue
		}
		if err := dec.Decode(msg, &rec); err != nil {
			t.Fatal(err)
		}
		r.apply(&rec, dec.Names())
	}
	if !pl.Faulted() {
		t.Error("the fault never began")
	}
	return r
}

// streamFileRun runs testdata/demo-stream.jsonl through bearing-temp.
func streamFileRun(t *testing.T, cfg *config.Config) *guardRun {
	m, _ := cfg.Model("bearing-temp")
	p, err := New(Options{Model: m})
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile("../../testdata/demo-stream.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	dec := record.NewDecoder(&record.DecoderOptions{MaxFeatures: p.Width()})
	r := newGuardRun(t, p)
	var rec record.Record
	sc := bufio.NewScanner(bytes.NewReader(data))
	for sc.Scan() {
		if err := dec.Decode(sc.Bytes(), &rec); err != nil {
			t.Fatal(err)
		}
		r.apply(&rec, dec.Names())
	}
	return r
}

// genRun runs n records of a generator through a default model of d
// features (window 10000).
func genRun(t *testing.T, name, loss string, d, n int, next func(i int, x []float64) float64) *guardRun {
	m := config.DefaultModel()
	m.Name, m.Subject, m.Loss = name, "test."+name, loss
	m.Features, m.MaxFeatures = featureNames(d), d
	h := newHarness(t, m)
	r := newGuardRun(t, h.p)
	x := make([]float64, d)
	var rec record.Record
	for i := range n {
		y := next(i, x)
		rec.X, rec.Y, rec.W = append(rec.X[:0], x...), y, 1
		r.apply(&rec, m.Features)
	}
	return r
}

// modelState returns the pipeline's saved state without its tail (the
// model: ladder, window, held-out ring, chooser, counters, names, drift
// watch, tuner, version), and the tail without
// the guard's run lengths (the newest record time and the guard's
// statistics): what a rejected record must leave bit for bit.
func modelState(t testing.TB, p *Pipeline) (model, stats []byte) {
	t.Helper()
	full, err := p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	e := newEnc()
	p.marshalTail(e)
	model = full[:len(full)-len(e.Bytes())]
	s := newEnc()
	s.int64(p.newestT)
	for _, c := range append(append([]gstat(nil), p.guard.cols...), p.guard.y) {
		s.uvarint(c.n)
		s.f64(c.mean)
		s.f64(c.vr)
	}
	return model, s.Bytes()
}

// gstep is one record of a guard case: features (NaN = missing), label,
// and the reason it must be rejected with ("" = accepted).
type gstep struct {
	x      []float64
	y      float64
	reason string
}

// interleave repeats the pattern of steps n times.
func interleave(n int, pattern ...gstep) []gstep {
	var out []gstep
	for range n {
		out = append(out, pattern...)
	}
	return out
}

func rep(n int, s gstep) []gstep {
	out := make([]gstep, n)
	for i := range out {
		out[i] = s
	}
	return out
}

// TestGuardRules checks each rule of the guard on a warm model (300
// records of a ~ N(10, 1), b ~ N(0, 1), c = 5 exactly, y = 2a + b + N(0,
// 1); window 1000, warm 100, persist 3): the outcome of every record, and
// that each rejected one left the model and the guard's statistics bit for
// bit as they were. The thresholds are this product's own rules (see
// guard); no outside source.
func TestGuardRules(t *testing.T) {
	nan := math.NaN()
	ok := func(a, b, c, y float64) gstep { return gstep{[]float64{a, b, c}, y, ""} }
	bad := func(a, b, c, y float64, reason string) gstep { return gstep{[]float64{a, b, c}, y, reason} }
	imp, oor := record.ReasonImplausible, record.ReasonOutOfRange
	cases := []struct {
		name  string
		loss  string
		cfg   func(*config.Model)
		cold  bool
		steps []gstep
	}{
		{name: "one wild feature", steps: []gstep{bad(1e29, 0, 5, 20, imp), ok(10, 0, 5, 20)}},
		{name: "one wild label", steps: []gstep{bad(10, 0, 5, 1e40, imp), ok(10, 0, 5, 20)}},
		{name: "wild values between ordinary ones stay out",
			steps: interleave(20, bad(-1e6, 0, 5, 20, imp), bad(-1e6, 0, 5, 20, imp), ok(10, 0, 5, 20))},
		{name: "wild values alternating sides never get in",
			steps: []gstep{bad(1e6, 0, 5, 20, imp), bad(-1e6, 0, 5, 20, imp), bad(1e6, 0, 5, 20, imp), bad(-1e6, 0, 5, 20, imp), bad(1e6, 0, 5, 20, imp), bad(-1e6, 0, 5, 20, imp)}},
		{name: "a step of 50 sd is accepted at once", steps: rep(5, ok(60, 0, 5, 120))},
		{name: "a constant channel's new level gets in after persist",
			steps: append(rep(3, bad(10, 0, 7, 20, imp)), rep(20, ok(10, 0, 7, 20))...)},
		{name: "a sentinel that persists gets in after persist, and is then ordinary",
			steps: append(append(rep(3, bad(-9999, 0, 5, 20, imp)), rep(3, ok(-9999, 0, 5, 20))...), ok(10, 0, 5, 20))},
		{name: "persist 0 never lets a level in", cfg: func(m *config.Model) { m.Guard.Persist = 0 },
			steps: rep(30, bad(10, 0, 7, 20, imp))},
		{name: "sd 0 turns the guard off", cfg: func(m *config.Model) { m.Guard.SD = 0 },
			steps: []gstep{ok(1e29, 0, 5, 20), ok(10, 0, 5, 1e40)}},
		{name: "a missing value is not checked", steps: []gstep{ok(nan, 0, 5, 20)}},
		{name: "beyond the learner's limit the learner says not_finite",
			steps: []gstep{bad(1e51, 0, 5, 20, record.ReasonNotFinite), bad(10, 0, 5, -1e60, record.ReasonNotFinite)}},
		{name: "bounds reject however often, and replace the sd guard",
			cfg: func(m *config.Model) {
				m.Guard.Bounds = []config.Bound{{Feature: "a", Max: config.Limit{V: 100, Set: true}}}
			},
			steps: append(rep(20, bad(150, 0, 5, 20, oor)), ok(99, 0, 5, 20), ok(-1e9, 0, 5, 20))},
		{name: "label bounds", cfg: func(m *config.Model) {
			m.Guard.Label = config.Range{Min: config.Limit{V: 0, Set: true}, Max: config.Limit{V: 1000, Set: true}}
		}, steps: []gstep{bad(10, 0, 5, -1, oor), bad(10, 0, 5, 1001, oor), ok(10, 0, 5, 1000)}},
		{name: "a cold model is not guarded", cold: true, steps: []gstep{ok(1e29, 0, 5, 20)}},
		{name: "a rare positive label of a logistic model is not guarded", loss: config.LossLogistic,
			steps: []gstep{ok(10, 0, 5, 1), ok(10, 0, 5, 0)}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := config.DefaultModel()
			m.Name, m.Subject = "guard", "test.guard"
			if tc.loss != "" {
				m.Loss = tc.loss
			}
			m.Features, m.MaxFeatures = []string{"a", "b", "c"}, 3
			m.Window.Records, m.Holdout.Records = 1000, 200
			m.Guard.Persist = 3
			if tc.cfg != nil {
				tc.cfg(&m)
			}
			h := newHarness(t, m)
			rng := rand.New(rand.NewPCG(1, 1))
			warm := 300
			if tc.cold {
				warm = 50
			}
			for range warm {
				a, b := 10+rng.NormFloat64(), rng.NormFloat64()
				y := 2*a + b + rng.NormFloat64()
				if m.Logistic() {
					y = 0 // a logistic label that is always 0 has σ = 0
				}
				h.feed([]float64{a, b, 5}, y)
			}
			for i, s := range tc.steps {
				model, stats := modelState(t, h.p)
				h.rec.X, h.rec.Y, h.rec.W = append(h.rec.X[:0], s.x...), s.y, 1
				_, err := h.p.Apply(&h.rec, h.names, h.now)
				got := ""
				var re *record.Error
				if errors.As(err, &re) {
					got = re.Reason
				} else if err != nil {
					t.Fatalf("step %d: %v", i, err)
				}
				if got != s.reason {
					t.Fatalf("step %d (%v, y %v): reason %q, want %q (%v)", i, s.x, s.y, got, s.reason, err)
				}
				if got == "" {
					continue
				}
				m2, s2 := modelState(t, h.p)
				if !bytes.Equal(model, m2) || !bytes.Equal(stats, s2) {
					t.Fatalf("step %d: rejected record changed the model (%v) or the guard's statistics (%v)",
						i, !bytes.Equal(model, m2), !bytes.Equal(stats, s2))
				}
			}
		})
	}
}

// TestGuardLearnedNames checks the guard on names learned from records: a
// bound on a name that arrives later applies from its first value, and a
// new channel starts cold (its first values are not judged against
// anything); a rejected record that brings a new name changes nothing.
func TestGuardLearnedNames(t *testing.T) {
	m := config.DefaultModel()
	m.Name, m.Subject = "learned", "test.learned"
	m.MaxFeatures = 8
	m.Guard.Bounds = []config.Bound{{Feature: "late", Min: config.Limit{V: 0, Set: true}}}
	h := newHarness(t, m)
	p := h.p
	dec := record.NewDecoder(&record.DecoderOptions{MaxFeatures: p.Width()})
	apply := func(msg string) string {
		t.Helper()
		var rec record.Record
		if err := dec.Decode([]byte(msg), &rec); err != nil {
			t.Fatal(err)
		}
		_, err := p.Apply(&rec, dec.Names(), h.now)
		var re *record.Error
		if errors.As(err, &re) {
			return re.Reason
		}
		if err != nil {
			t.Fatal(err)
		}
		return ""
	}
	for i := range 300 {
		if r := apply(`{"y":` + itoa(i%7) + `,"x":{"a":` + itoa(i%5) + `}}`); r != "" {
			t.Fatalf("warm-up record %d: %s", i, r)
		}
	}
	if r := apply(`{"y":1,"x":{"a":1e12}}`); r != record.ReasonImplausible {
		t.Errorf("warm channel: %q, want implausible", r)
	}
	// A rejected record that brings a new name leaves the layout too: the
	// names, the width and the columns wait for the next record taken.
	model, _ := modelState(t, p)
	width := p.ladder.Features()
	if r := apply(`{"y":1,"x":{"a":1e12,"other":1}}`); r != record.ReasonImplausible {
		t.Errorf("warm channel beside a new name: %q, want implausible", r)
	}
	if after, _ := modelState(t, p); !bytes.Equal(model, after) || p.ladder.Features() != width {
		t.Errorf("a rejected record with a new name changed the model (width %d → %d)", width, p.ladder.Features())
	}
	if r := apply(`{"y":1,"x":{"a":1,"new":1e12}}`); r != "" {
		t.Errorf("a new channel's first value: %q, want accepted", r)
	}
	if r := apply(`{"y":1,"x":{"a":1,"late":-1}}`); r != record.ReasonOutOfRange {
		t.Errorf("bounded channel learned late: %q, want out_of_range", r)
	}
	if r := apply(`{"y":1,"x":{"a":1,"late":1}}`); r != "" {
		t.Errorf("bounded channel in range: %q", r)
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

// TestGuardState saves a pipeline whose guard is in the middle of a run of
// rejections, restores it, and checks that the restored pipeline re-saves
// to the same bytes and treats the rest of the stream exactly as the
// original does.
func TestGuardState(t *testing.T) {
	m := config.DefaultModel()
	m.Name, m.Subject = "gstate", "test.gstate"
	m.Features, m.MaxFeatures = []string{"a", "b"}, 2
	m.Window.Records, m.Holdout.Records = 1000, 200
	h := newHarness(t, m)
	rng := rand.New(rand.NewPCG(2, 2))
	for range 300 {
		a := rng.NormFloat64()
		h.feed([]float64{a, 3}, a+rng.NormFloat64())
	}
	rec := func(a, b, y float64) *record.Record { return &record.Record{X: []float64{a, b}, Y: y, W: 1} }
	for range 4 { // b sat at 3: four rejections of a run of persist = 10
		if _, err := h.p.Apply(rec(0, 4, 0), h.names, h.now); err == nil {
			t.Fatal("new level of a constant channel accepted at once")
		}
	}
	saved, err := h.p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	q, err := Restore(Options{Model: h.p.cfg}, saved)
	if err != nil {
		t.Fatal(err)
	}
	again, _ := q.MarshalBinary()
	if !bytes.Equal(saved, again) {
		t.Fatal("restored pipeline saves different bytes")
	}
	for i := range 20 {
		r1, r2 := rec(rng.NormFloat64(), 4, 0), (*record.Record)(nil)
		r2 = &record.Record{X: append([]float64(nil), r1.X...), Y: r1.Y, W: 1}
		_, e1 := h.p.Apply(r1, h.names, h.now)
		_, e2 := q.Apply(r2, h.names, h.now)
		if (e1 == nil) != (e2 == nil) {
			t.Fatalf("record %d: original %v, restored %v", i, e1, e2)
		}
		if i < 6 && e1 == nil || i >= 6 && e1 != nil {
			t.Errorf("record %d of the run: %v (want rejected up to the 10th in all)", i, e1)
		}
	}
	b1, _ := h.p.MarshalBinary()
	b2, _ := q.MarshalBinary()
	if !bytes.Equal(b1, b2) {
		t.Error("original and restored pipelines diverged")
	}

}

// BenchmarkGuard times Pipeline.Apply of the default model with the guard
// on (the default) and off (guard.sd 0) in the same loop, alternating
// records between the two so that both see the same machine load, and
// reports each per record and their ratio (go test -run '^$'
// -bench Guard -benchtime 40000x ./daemon/pipeline/). Width 256 (the
// default max_features) with 16 channels, and 64 of 64.
func BenchmarkGuard(b *testing.B) {
	for _, c := range []struct{ d, width int }{{16, 256}, {64, 64}} {
		b.Run(fmt.Sprintf("d=%d/width=%d", c.d, c.width), func(b *testing.B) {
			mk := func(sd float64) *harness {
				m := config.DefaultModel()
				m.Name, m.Subject = "bench", "bench"
				m.Features, m.MaxFeatures = featureNames(c.d), c.width
				m.Guard.SD = sd
				return newHarness(b, m)
			}
			on, off := mk(config.DefaultGuardSD), mk(0)
			rng := rand.New(rand.NewPCG(1, 2))
			xs := make([][]float64, 4096)
			ys := make([]float64, len(xs))
			for i := range xs {
				xs[i] = make([]float64, c.d)
				for j := range xs[i] {
					xs[i][j] = rng.NormFloat64()
				}
				ys[i] = xs[i][0] - xs[i][1] + rng.NormFloat64()
			}
			for i := range 12000 {
				on.feed(xs[i&4095], ys[i&4095])
				off.feed(xs[i&4095], ys[i&4095])
			}
			var ton, toff time.Duration
			var non, noff int
			i := 0
			b.ResetTimer()
			for b.Loop() {
				h, t, n := on, &ton, &non // both get the same records: i and i+1 share xs[i/2]
				if i%2 == 1 {
					h, t, n = off, &toff, &noff
				}
				st := time.Now()
				h.feed(xs[i/2&4095], ys[i/2&4095])
				*t += time.Since(st)
				*n++
				i++
			}
			if non > 0 && noff > 0 {
				a, z := float64(ton)/float64(non), float64(toff)/float64(noff)
				b.ReportMetric(a, "ns/on")
				b.ReportMetric(z, "ns/off")
				b.ReportMetric(a/z, "on/off")
			}
		})
	}
}
