package pipeline

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
)

// Stream generators of the drift tests. Each names its source.

// seaStream is the SEA concepts generator of Street & Kim (2001), "A
// streaming ensemble algorithm (SEA) for large-scale classification", KDD:
// three features uniform on [0, 10] (the third irrelevant), label 1 when
// f1 + f2 ≤ θ, θ switching abruptly between concepts (the paper's 8, 9, 7,
// 9.5), and optionally each label flipped with probability noise (the
// paper uses 10%).
type seaStream struct {
	rng   *rand.Rand
	theta float64
	noise float64
}

// seaThetas are the paper's four concepts, in order.
var seaThetas = [...]float64{8, 9, 7, 9.5}

func newSEA(seed uint64, theta, noise float64) *seaStream {
	return &seaStream{rng: rand.New(rand.NewPCG(seed, 0x5ea)), theta: theta, noise: noise}
}

// next fills x (len 3) and returns the label.
func (s *seaStream) next(x []float64) float64 {
	for j := range 3 {
		x[j] = 10 * s.rng.Float64()
	}
	y := 0.0
	if x[0]+x[1] <= s.theta {
		y = 1
	}
	if s.noise > 0 && s.rng.Float64() < s.noise {
		y = 1 - y
	}
	return y
}

// hyperplaneStream is the rotating hyperplane of Hulten, Spencer & Domingos
// (2001), "Mining time-changing data streams", KDD: x uniform on [0, 1]^d,
// label 1 when Σ w_i x_i ≥ w_0 with w_0 = ½ Σ w_i; every record each weight
// moves by σ·s_i (gradual drift) and s_i reverses with probability 10%;
// labels flipped with probability noise (the paper uses 5%).
type hyperplaneStream struct {
	rng   *rand.Rand
	w, s  []float64
	sigma float64
	noise float64
}

func newHyperplane(seed uint64, d int, sigma, noise float64) *hyperplaneStream {
	h := &hyperplaneStream{rng: rand.New(rand.NewPCG(seed, 0x4e7)), w: make([]float64, d), s: make([]float64, d), sigma: sigma, noise: noise}
	for i := range h.w {
		h.w[i] = h.rng.Float64()
		h.s[i] = 1
		if h.rng.IntN(2) == 0 {
			h.s[i] = -1
		}
	}
	return h
}

func (h *hyperplaneStream) next(x []float64) float64 {
	var dot, sum float64
	for i := range h.w {
		x[i] = h.rng.Float64()
		dot += h.w[i] * x[i]
		sum += h.w[i]
	}
	y := 0.0
	if dot >= sum/2 {
		y = 1
	}
	if h.noise > 0 && h.rng.Float64() < h.noise {
		y = 1 - y
	}
	for i := range h.w {
		h.w[i] += h.sigma * h.s[i]
		if h.rng.Float64() < 0.1 {
			h.s[i] = -h.s[i]
		}
	}
	return y
}

// friedman1 is Friedman #1 of Friedman (1991), "Multivariate adaptive
// regression splines", Annals of Statistics 19(1): x uniform on [0, 1]^p,
// y = 10 sin(π x1 x2) + 20 (x3 − 0.5)² + 10 x4 + 5 x5 + ε, ε ~ N(0, sd²);
// only the first five features matter.
type friedman1 struct {
	rng *rand.Rand
	sd  float64
}

func newFriedman1(seed uint64, sd float64) *friedman1 {
	return &friedman1{rng: rand.New(rand.NewPCG(seed, 0xf1)), sd: sd}
}

func (f *friedman1) next(x []float64) float64 {
	for j := range x {
		x[j] = f.rng.Float64()
	}
	return 10*math.Sin(math.Pi*x[0]*x[1]) + 20*(x[2]-0.5)*(x[2]-0.5) + 10*x[3] + 5*x[4] + f.sd*f.rng.NormFloat64()
}

// switchStream is a linear stream y = 2·x_k + N(0, 0.5²), x ~ N(0, I_d),
// whose informative feature k the test switches (an abrupt change of the
// support; a constructed stream, no published source).
type switchStream struct {
	rng *rand.Rand
	k   int
}

func (s *switchStream) next(x []float64) float64 {
	for j := range x {
		x[j] = s.rng.NormFloat64()
	}
	return 2*x[s.k] + 0.5*s.rng.NormFloat64()
}

// harness drives one model's Pipeline as the daemon's worker does, without
// NATS or goroutines: every record goes through Pipeline.Apply
// (test-then-train loss, holdout split, retunes, drift watch, threshold
// tuning), and what it raised is kept in a sink.Store as the daemon keeps
// it (the store holds the newest 100 alerts per model).
type harness struct {
	t     testing.TB
	p     *Pipeline
	store *sink.Store
	names []string
	rec   record.Record
	now   time.Time
}

// newHarness builds the pipeline of m (validated with the daemon's
// defaults). m.Features must be set.
func newHarness(t testing.TB, m config.Model) *harness {
	t.Helper()
	cfg := config.Default()
	cfg.DataDir = t.TempDir()
	cfg.Models = []config.Model{m}
	if err := cfg.Validate(); err != nil {
		t.Fatalf("test config: %v", err)
	}
	p, err := New(Options{Model: &cfg.Models[0]})
	if err != nil {
		t.Fatal(err)
	}
	st := sink.NewStore()
	st.Register(m.Name)
	return &harness{t: t, p: p, store: st, names: m.Features, now: time.Unix(1e9, 0)}
}

// feed applies one record with features x (len ≤ width) and label y; a
// rejected record fails the test.
func (h *harness) feed(x []float64, y float64) {
	h.rec.X = append(h.rec.X[:0], x...)
	for len(h.rec.X) < h.p.Width() {
		h.rec.X = append(h.rec.X, math.NaN())
	}
	h.rec.Y, h.rec.W, h.rec.HasT, h.rec.T = y, 1, false, 0
	st, err := h.p.Apply(&h.rec, h.names, h.now)
	if err != nil {
		h.t.Fatalf("record rejected: %v", err)
	}
	for _, a := range st.Alerts {
		h.store.AddAlert(a)
	}
	if st.ROC != nil {
		h.store.SetROC(h.p.Name(), st.ROC)
	}
}

// publish publishes the current model, forced, a second after the last.
func (h *harness) publish() *Snapshot {
	h.now = h.now.Add(time.Second)
	s, err := h.p.Publish(h.now, 0, true)
	if err != nil {
		h.t.Fatal(err)
	}
	return s
}

// alertsOf returns the stored alerts of kind.
func (h *harness) alertsOf(kind sink.AlertKind) []sink.Alert {
	var out []sink.Alert
	for _, a := range h.store.Alerts(h.p.Name()) {
		if a.Kind == kind {
			out = append(out, a)
		}
	}
	return out
}

// watch returns the model's drift watch.
func (h *harness) watch() *watch { return h.p.watch }

// tuner returns the model's threshold tuner.
func (h *harness) tuner() *tuner {
	if h.p.tuner == nil {
		h.t.Fatal("no tuner")
	}
	return h.p.tuner
}

// driftModel is the model configuration of the drift tests: fixed feature
// list, no cooldown (every detection is an alert), retune every 250.
func driftModel(name, loss string, features []string, window int) config.Model {
	m := config.DefaultModel()
	m.Name, m.Subject, m.Loss = name, "test."+name, loss
	m.Features = features
	m.MaxFeatures = len(features)
	m.Window.Records = window
	m.Holdout.Records = window / 4
	m.Retune.Every = 250
	m.Drift.Cooldown = 0
	return m
}

// names returns n feature names x1..xn.
func featureNames(n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = "x" + string(rune('0'+(i+1)/10)) + string(rune('0'+(i+1)%10))
	}
	return out
}
