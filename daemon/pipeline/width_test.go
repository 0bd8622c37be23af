package pipeline

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
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
// applied to a model with the daemon's default settings, with its names
// learned from the records under the default cap (max_features 256) and
// with its 20 features listed (max_features 20): ns per record, and the
// heap the model holds once its window is full (heap-bytes, from
// runtime.MemStats after a GC). The ratio learned/listed is the cost of
// learning the names.
//
//	go test -run '^$' -bench '^BenchmarkWidth$' -benchtime 20000x -count 3 ./daemon/pipeline/
func BenchmarkWidth(b *testing.B) {
	const d = 20
	msgs, names := widthStream(4096, d)
	for _, c := range []struct {
		name string
		list []string
		max  int
	}{{"learned", nil, 0}, {"listed", names, d}} {
		b.Run(c.name, func(b *testing.B) {
			var ms runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&ms)
			heap0 := ms.HeapAlloc
			w := newWidthRun(b, c.list, c.max)
			now := time.Unix(1e9, 0)
			for i := range 13000 { // a full window (10,000 train records) and holdout
				w.apply(b, msgs[i&4095], now)
			}
			runtime.GC()
			runtime.ReadMemStats(&ms)
			b.ReportMetric(float64(ms.HeapAlloc-heap0), "heap-bytes")
			b.ReportAllocs()
			i := 0
			for b.Loop() {
				w.apply(b, msgs[i&4095], now)
				i++
			}
			runtime.KeepAlive(w)
		})
	}
}
