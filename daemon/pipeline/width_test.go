package pipeline

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// widthRun decodes and applies a JSON stream of d channels, all present in
// every record, to a model whose features are listed (list) or learned
// from the records under the default cap.
type widthRun struct {
	p   *Pipeline
	dec *record.Decoder
	rec record.Record
}

func newWidthRun(t testing.TB, list []string, maxFeatures int) *widthRun {
	t.Helper()
	m := config.DefaultModel()
	m.Name, m.Subject = "width", "width"
	m.Features = list
	if maxFeatures > 0 {
		m.MaxFeatures = maxFeatures
	}
	cfg := config.Default()
	cfg.DataDir = t.TempDir()
	cfg.Models = []config.Model{m}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := New(Options{Model: &cfg.Models[0]})
	if err != nil {
		t.Fatal(err)
	}
	dec := record.NewDecoder(&record.DecoderOptions{Features: list, MaxFeatures: p.Width()})
	return &widthRun{p: p, dec: dec}
}

func (w *widthRun) apply(t testing.TB, msg []byte, now time.Time) {
	if err := w.dec.Decode(msg, &w.rec); err != nil {
		t.Fatal(err)
	}
	if _, err := w.p.Apply(&w.rec, w.dec.Names(), now); err != nil {
		t.Fatal(err)
	}
}

// widthStream returns n JSON records with d channels, all present.
func widthStream(n, d int) ([][]byte, []string) {
	names := featureNames(d)
	s := &sparseStream{rng: rand.New(rand.NewPCG(3, 4))}
	out := make([][]byte, n)
	x := make([]float64, d)
	for i := range out {
		y := s.next(x)
		out[i] = record.AppendJSON(nil, names, &record.Record{X: x, Y: y, W: 1})
	}
	return out, names
}

// TestLearnedWidthBitIdentical: a stream whose channels all come with its
// first record gives bit-identical models (every member, the published
// document's numbers, the held-out scores) whether its names are learned
// under the default cap of 256 or listed in the configuration (with the
// default cap, and with max_features equal to the list, the fixed width).
func TestLearnedWidthBitIdentical(t *testing.T) {
	const d, n = 20, 3000
	msgs, names := widthStream(n, d)
	runs := map[string]*widthRun{
		"learned":    newWidthRun(t, nil, 0),
		"listed":     newWidthRun(t, names, 0),
		"listed_cap": newWidthRun(t, names, d),
	}
	now := time.Unix(1e9, 0)
	for i, msg := range msgs {
		for _, r := range runs {
			r.apply(t, msg, now)
			if i%700 == 0 {
				r.p.Idle(20)
			}
		}
	}
	ref := runs["listed_cap"].p
	if ref.Ladder().Features() != d {
		t.Fatalf("reference width %d", ref.Ladder().Features())
	}
	for name, r := range runs {
		if r.p.Ladder().Features() != d {
			t.Errorf("%s: width %d, want %d", name, r.p.Ladder().Features(), d)
		}
		for i := range ref.Ladder().Size() {
			a, b := ref.Ladder().Model(i), r.p.Ladder().Model(i)
			if !sameFloats(modelFloats(a), modelFloats(b)) {
				t.Fatalf("%s: member %d differs", name, i)
			}
		}
		sa, sb := ref.Scores(), r.p.Scores()
		if len(sa) == 0 || len(sa) != len(sb) {
			t.Fatalf("%s: %d scores, reference %d", name, len(sb), len(sa))
		}
		for i := range sa {
			if math.Float64bits(sa[i].Loss) != math.Float64bits(sb[i].Loss) || sa[i].Lambda != sb[i].Lambda {
				t.Fatalf("%s: score %d differs: %+v %+v", name, i, sa[i], sb[i])
			}
		}
		if r.p.Current() != ref.Current() {
			t.Fatalf("%s: λ* index %d, reference %d", name, r.p.Current(), ref.Current())
		}
	}
}

func modelFloats(m online.Model) []float64 {
	v := []float64{m.Lambda, m.Intercept, m.StdIntercept, m.Weight}
	for _, s := range [][]float64{m.Coef, m.Standardized, m.Mean, m.Std} {
		v = append(v, s...)
	}
	return v
}

func sameFloats(a, b []float64) bool {
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

// BenchmarkWidth measures a 20-channel stream, decoded from JSON and
// applied to a model with the daemon's default settings (window 10,000,
// K = 12, every 5th record held out), with its names learned from the
// records under the default cap (max_features 256) and with its 20
// features listed (max_features 20). The two models take turns on the
// same records inside each iteration, each timed on its own, so that both
// see the same load on a shared machine: learned-ns/rec and listed-ns/rec
// per record and their ratio; and the heap each holds once its window is
// full (runtime.MemStats.HeapAlloc after a GC, before and after building
// and filling it) and their ratio.
//
//	go test -run '^$' -bench '^BenchmarkWidth$' -benchtime 20000x -count 3 ./daemon/pipeline/
func BenchmarkWidth(b *testing.B) {
	const d = 20
	msgs, names := widthStream(4096, d)
	now := time.Unix(1e9, 0)
	build := func(list []string, maxFeatures int) (*widthRun, float64) {
		var ms runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&ms)
		heap0 := ms.HeapAlloc
		w := newWidthRun(b, list, maxFeatures)
		for i := range 13000 { // a full window (10,000 train records) and holdout
			w.apply(b, msgs[i&4095], now)
		}
		runtime.GC()
		runtime.ReadMemStats(&ms)
		return w, float64(ms.HeapAlloc) - float64(heap0)
	}
	learned, heapLearned := build(nil, 0)
	listed, heapListed := build(names, d)
	tLearned, tListed := make([]time.Duration, 0, b.N), make([]time.Duration, 0, b.N)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		msg := msgs[i&4095]
		first, second, t1, t2 := learned, listed, &tLearned, &tListed
		if i&1 == 1 { // alternate the order
			first, second, t1, t2 = listed, learned, &tListed, &tLearned
		}
		s0 := time.Now()
		first.apply(b, msg, now)
		s1 := time.Now()
		second.apply(b, msg, now)
		s2 := time.Now()
		*t1 = append(*t1, s1.Sub(s0))
		*t2 = append(*t2, s2.Sub(s1))
		i++
	}
	// Medians: a record that the scheduler preempted (other processes on a
	// shared machine) takes milliseconds and would dominate a mean.
	mLearned, mListed := medianNs(tLearned), medianNs(tListed)
	b.ReportMetric(mLearned, "learned-ns/rec")
	b.ReportMetric(mListed, "listed-ns/rec")
	b.ReportMetric(mLearned/mListed, "time-learned/listed")
	b.ReportMetric(heapLearned, "learned-heap-B")
	b.ReportMetric(heapListed, "listed-heap-B")
	b.ReportMetric(heapLearned/heapListed, "heap-learned/listed")
	runtime.KeepAlive(learned)
	runtime.KeepAlive(listed)
}

// medianNs returns the median of ts in nanoseconds.
func medianNs(ts []time.Duration) float64 {
	if len(ts) == 0 {
		return 0
	}
	slices.Sort(ts)
	return float64(ts[len(ts)/2].Nanoseconds())
}

// slotStream applies n records to w with channels a, b, c and, when
// extra is not "", a fourth channel of that name; y depends on it.
func slotStream(t testing.TB, rng *rand.Rand, ws []*widthRun, n int, extra string, now time.Time) {
	t.Helper()
	names := []string{"a", "b", "c"}
	if extra != "" {
		names = append(names, extra)
	}
	x := make([]float64, len(names))
	for range n {
		for j := range x {
			x[j] = rng.NormFloat64()
		}
		y := x[0] - x[1] + 0.1*rng.NormFloat64()
		if extra != "" {
			y += 2 * x[3]
		}
		msg := record.AppendJSON(nil, names, &record.Record{X: x, Y: y, W: 1})
		for _, w := range ws {
			w.apply(t, msg, now)
		}
	}
}

// TestSlotReuse: a learned channel that stops for a whole window loses
// its slot; the pipeline resets its column (every member's coefficient 0,
// fresh) although it was in the model, and no document names it; a new
// channel then takes the slot and enters the model. A checkpoint taken
// with the slot free, and one with it reused, round-trip byte for byte and
// continue bit-identically (width, names with a free slot, fresh columns).
func TestSlotReuse(t *testing.T) {
	m := config.DefaultModel()
	m.Name, m.Subject = "slots", "slots"
	m.Window.Records, m.Holdout.Records, m.Retune.Every, m.MaxFeatures = 200, 50, 50, 4
	cfg := config.Default()
	cfg.DataDir = t.TempDir()
	cfg.Models = []config.Model{m}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	mc := &cfg.Models[0]
	p, err := New(Options{Model: mc})
	if err != nil {
		t.Fatal(err)
	}
	freeAfter := m.Window.Records + m.Window.Records/(m.Holdout.Every-1)
	w := &widthRun{p: p, dec: record.NewDecoder(&record.DecoderOptions{MaxFeatures: 4, FreeAfter: freeAfter})}
	rng := rand.New(rand.NewPCG(5, 6))
	now := time.Unix(1e9, 0)
	slotStream(t, rng, []*widthRun{w}, 600, "j", now)
	p.Idle(200)
	if m := p.Ladder().Model(max(p.Current(), 0)); m.Coef[3] == 0 {
		t.Fatal("j should be in the model")
	}
	if s, err := p.Document(now, 0); err != nil || s.Doc.Coefficients["j"] == 0 {
		t.Fatalf("document without j: %v", err)
	}
	if s, err := p.Publish(now, 0, true); err != nil || s == nil {
		t.Fatalf("publish: %v", err)
	}
	for i := 0; p.Names()[3] != ""; i++ {
		if i > freeAfter+2*64 {
			t.Fatalf("slot of j not freed after %d records: %q", i, p.Names())
		}
		slotStream(t, rng, []*widthRun{w}, 1, "", now)
	}
	l := p.Ladder()
	if !l.Fresh(3) {
		t.Fatal("freed column not fresh")
	}
	for i := range l.Size() {
		if th := l.Model(i).Standardized[3]; th != 0 {
			t.Fatalf("member %d keeps θ = %v for the freed slot", i, th)
		}
	}
	// The next publication opportunity sends a version without j.
	s, err := p.Publish(now.Add(2*time.Second), 0, false)
	if err != nil || s == nil {
		t.Fatalf("no version after the slot was freed: %v", err)
	}
	if slices.Contains(s.Names, "j") || slices.Contains(s.Names, "") || slices.Contains(s.Doc.Features, "j") || len(s.Model.Coef) != 3 {
		t.Fatalf("document after the slot was freed: names %q, features %q, %d coefficients", s.Names, s.Doc.Features, len(s.Model.Coef))
	}
	for _, path := range s.Path {
		if len(path) != 3 {
			t.Fatalf("path of %d columns", len(path))
		}
	}
	// Checkpoints with the slot free and reused round-trip and continue.
	twin := func() *widthRun {
		t.Helper()
		b, err := p.MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		q, err := Restore(Options{Model: mc}, b)
		if err != nil {
			t.Fatal(err)
		}
		if again, err := q.MarshalBinary(); err != nil || !bytes.Equal(again, b) {
			t.Fatalf("re-saved state differs (%v)", err)
		}
		return &widthRun{p: q, dec: record.NewDecoder(&record.DecoderOptions{Learned: q.Names(), MaxFeatures: 4, FreeAfter: freeAfter})}
	}
	free := twin()
	slotStream(t, rng, []*widthRun{w, free}, 5, "k", now)
	if got := p.Names(); !slices.Equal(got, []string{"a", "b", "c", "k"}) || l.Fresh(3) {
		t.Fatalf("names %q, fresh %v", got, l.Fresh(3))
	}
	reused := twin()
	slotStream(t, rng, []*widthRun{w, free, reused}, 600, "k", now)
	for name, o := range map[string]*widthRun{"free": free, "reused": reused} {
		for i := range l.Size() {
			if !sameFloats(modelFloats(l.Model(i)), modelFloats(o.p.Ladder().Model(i))) {
				t.Fatalf("%s: member %d differs after the restore", name, i)
			}
		}
	}
	p.Idle(200)
	if s, err := p.Document(now, 0); err != nil || s.Doc.Coefficients["k"] == 0 {
		t.Fatalf("k not in the model: %v", err)
	}
}

// TestRejectedKeepsLayout: a record the learner refuses (a value beyond
// the learner's bound) that brings a new name leaves the model as it was,
// width included; the next record taken brings the new column.
func TestRejectedKeepsLayout(t *testing.T) {
	msgs, _ := widthStream(300, 3)
	w := newWidthRun(t, nil, 0)
	now := time.Unix(1e9, 0)
	for _, msg := range msgs {
		w.apply(t, msg, now)
	}
	before := w.p.Ladder().Model(0)
	if err := w.dec.Decode([]byte(`{"y":1,"x":{"x01":1,"new":1e60}}`), &w.rec); err != nil {
		t.Fatal(err)
	}
	_, err := w.p.Apply(&w.rec, w.dec.Names(), now)
	if !errors.Is(err, &record.Error{Reason: record.ReasonNotFinite}) {
		t.Fatalf("got %v, want not_finite", err)
	}
	if got := w.p.Ladder().Features(); got != 3 || !sameFloats(modelFloats(before), modelFloats(w.p.Ladder().Model(0))) {
		t.Fatalf("rejected record changed the model (width %d)", got)
	}
	w.apply(t, []byte(`{"y":1,"x":{"x01":1,"new":2}}`), now)
	if got := w.p.Ladder().Features(); got != 6 {
		t.Fatalf("width %d after the new name was taken, want 6 (doubled)", got)
	}
}

// TestRenamed: a changed feature list is a reason to publish.
func TestRenamed(t *testing.T) {
	doc := func(names ...string) *sink.ModelDoc { return &sink.ModelDoc{Features: names} }
	for _, tc := range []struct {
		name       string
		prev, next *sink.ModelDoc
		want       bool
	}{
		{"first", nil, doc("a"), false},
		{"same", doc("a", "b"), doc("a", "b"), false},
		{"freed", doc("a", "j"), doc("a"), true},
		{"taken", doc("a", "j"), doc("a", "k"), true},
		{"learned", doc("a"), doc("a", "b"), true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := renamed(tc.prev, tc.next); got != tc.want {
				t.Fatalf("renamed = %v, want %v", got, tc.want)
			}
		})
	}
}
