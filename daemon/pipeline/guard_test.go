package pipeline

import (
	"bufio"
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"os"
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
	m.Features = featureNames(d)
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
