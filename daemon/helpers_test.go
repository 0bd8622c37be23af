package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	dto "github.com/prometheus/client_model/go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/sink/natstest"
)

// testModel returns a model with every default and fast retuning.
func testModel(name, subject, loss string) config.Model {
	m := config.DefaultModel()
	m.Name, m.Subject, m.Loss = name, subject, loss
	m.Retune.Every = 250
	m.Publish.Heartbeat = config.Duration(time.Second)
	return m
}

// testConfig returns a valid configuration with an embedded NATS server on a
// random loopback port, HTTP on a random port and data in a temp dir.
func testConfig(t testing.TB, models ...config.Model) *config.Config {
	t.Helper()
	return testConfigMode(t, config.IntakeAuto, models...)
}

// testConfigMode is testConfig with the given intake mode.
func testConfigMode(t testing.TB, mode string, models ...config.Model) *config.Config {
	t.Helper()
	cfg := config.Default()
	cfg.Intake.Mode = mode
	cfg.NATS.Listen = "127.0.0.1:-1"
	cfg.HTTP.Listen = "127.0.0.1:0"
	cfg.DataDir = t.TempDir()
	cfg.Models = models
	if err := cfg.Validate(); err != nil {
		t.Fatalf("test config: %v", err)
	}
	return cfg
}

// testDaemon is a running daemon and its stop function.
type testDaemon struct {
	*Daemon
	cancel context.CancelFunc
	errc   chan error
}

// stop shuts the daemon down and returns Run's result (idempotent).
func (td *testDaemon) stop(t testing.TB) error {
	t.Helper()
	td.cancel()
	select {
	case err := <-td.errc:
		td.errc <- err
		return err
	case <-time.After(ShutdownTimeout + 5*time.Second):
		t.Fatal("daemon did not stop")
		return nil
	}
}

// startDaemon starts a daemon on cfg and waits until it has started; it is
// stopped at the end of the test.
func startDaemon(t testing.TB, cfg *config.Config, opts ...Option) *testDaemon {
	t.Helper()
	d, err := New(cfg, opts...)
	if err != nil {
		t.Fatal(err)
	}
	return runDaemon(t, d)
}

// runDaemon runs a daemon already built with New (so a test can adjust its
// internals first) and waits until it has started; it is stopped at the
// end of the test.
func runDaemon(t testing.TB, d *Daemon) *testDaemon {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	td := &testDaemon{Daemon: d, cancel: cancel, errc: make(chan error, 1)}
	go func() { td.errc <- d.Run(ctx) }()
	select {
	case <-d.Started():
	case err := <-td.errc:
		t.Fatalf("daemon did not start: %v", err)
	case <-time.After(10 * time.Second):
		t.Fatal("daemon did not start within 10s")
	}
	t.Cleanup(func() { td.stop(t) })
	return td
}

// withoutIdle turns idle steps off (for bit-exact comparisons).
func withoutIdle() Option { return func(d *Daemon) error { d.noIdle = true; return nil } }

// connect returns a plain NATS client connected to the daemon's server.
func connect(t testing.TB, url string) *nats.Conn {
	t.Helper()
	nc, err := nats.Connect(url, nats.Name("test-client"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	return nc
}

// metricValue returns the value of the counter or gauge name with exactly
// the given labels (0 if absent).
func metricValue(t testing.TB, d *Daemon, name string, labels map[string]string) float64 {
	t.Helper()
	mfs, err := d.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			if !labelsMatch(m, labels) {
				continue
			}
			switch {
			case m.Counter != nil:
				return m.Counter.GetValue()
			case m.Gauge != nil:
				return m.Gauge.GetValue()
			case m.Histogram != nil:
				return float64(m.Histogram.GetSampleCount())
			}
		}
	}
	return 0
}

func labelsMatch(m *dto.Metric, want map[string]string) bool {
	if len(m.GetLabel()) != len(want) {
		return false
	}
	for _, l := range m.GetLabel() {
		if want[l.GetName()] != l.GetValue() {
			return false
		}
	}
	return true
}

// getDoc fetches a model over HTTP.
func getDoc(d *Daemon, name string) (*sink.ModelDoc, http.Header, error) {
	resp, err := http.Get("http://" + d.HTTPAddr() + "/v1/models/" + name)
	if err != nil {
		return nil, nil, err
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK {
		return nil, resp.Header, fmt.Errorf("GET %s: %s: %s", name, resp.Status, body)
	}
	var doc sink.ModelDoc
	if err := json.Unmarshal(body, &doc); err != nil {
		return nil, nil, err
	}
	return &doc, resp.Header, nil
}

// truth is a sparse linear predictor over d named features.
type truth struct {
	names     []string
	coef      []float64
	intercept float64
}

// sparseTruth has d features x00..x{d-1}, four of them nonzero with mixed
// signs.
func sparseTruth(d int) truth {
	tr := truth{coef: make([]float64, d), intercept: 0.5}
	for j := range d {
		tr.names = append(tr.names, fmt.Sprintf("x%02d", j))
	}
	// features 3, 7, 12, 18 of 20 (spread the same way for other d ≥ 4)
	tr.coef[3*d/20], tr.coef[7*d/20], tr.coef[12*d/20], tr.coef[18*d/20] = 1.5, -1.2, 1.0, -1.6
	return tr
}

// support returns the nonzero names of the truth.
func (tr truth) support() map[string]float64 {
	s := make(map[string]float64)
	for j, c := range tr.coef {
		if c != 0 {
			s[tr.names[j]] = c
		}
	}
	return s
}

// records returns n named-feature JSON records drawn from the truth: y =
// intercept + xᵀβ + N(0, 0.5²) for squared, y ~ Bernoulli(σ(intercept + xᵀβ))
// for logistic; x ~ N(0, 1) independent (seeded, deterministic).
func (tr truth) records(n int, logistic bool, seed uint64) [][]byte {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([][]byte, n)
	x := make([]float64, len(tr.coef))
	for i := range n {
		eta := tr.intercept
		for j := range x {
			x[j] = rng.NormFloat64()
			eta += tr.coef[j] * x[j]
		}
		var y float64
		if logistic {
			if rng.Float64() < online.Sigmoid(eta) {
				y = 1
			}
		} else {
			y = eta + 0.5*rng.NormFloat64()
		}
		r := record.Record{X: make([]float64, len(x)), Y: y}
		for j := range x {
			r.X[j] = round5(x[j])
		}
		out[i] = record.AppendJSON(nil, tr.names, &r)
	}
	return out
}

// checkSupport fails unless doc's nonzero coefficients are exactly the
// truth's support with the same signs.
func checkSupport(doc *sink.ModelDoc, tr truth) error {
	want := tr.support()
	if len(doc.Coefficients) != len(want) {
		return fmt.Errorf("version %d: %d nonzero coefficients %v, want %d %v", doc.Version, len(doc.Coefficients), doc.Coefficients, len(want), want)
	}
	for name, c := range want {
		got, ok := doc.Coefficients[name]
		if !ok || math.Signbit(got) != math.Signbit(c) {
			return fmt.Errorf("version %d: coefficient %s = %v (present %v), want sign of %v; all %v", doc.Version, name, got, ok, c, doc.Coefficients)
		}
	}
	return nil
}

// driftModel is a model with a fixed feature list, no cooldown (every
// detection is an alert) and a retune every 250 records (the pipeline's
// drift tests use the same settings).
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

// featureNames returns n feature names x01..xn.
func featureNames(n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("x%02d", i+1)
	}
	return out
}

// snapshotLadder returns every ladder member's snapshot, read on the model
// goroutine.
func snapshotLadder(t testing.TB, w *worker) []online.Model {
	t.Helper()
	var ms []online.Model
	if !w.exec(func() {
		l := w.pipe.Ladder()
		for i := range l.Size() {
			ms = append(ms, l.Model(i))
		}
	}) {
		t.Fatal("model goroutine stopped")
	}
	return ms
}

// sameBits reports whether two ladder snapshots are bit-for-bit equal.
func sameBits(a, b []online.Model) error {
	if len(a) != len(b) {
		return errors.New("different ladder sizes")
	}
	eq := func(x, y float64) bool { return math.Float64bits(x) == math.Float64bits(y) }
	for i := range a {
		if !eq(a[i].Intercept, b[i].Intercept) || !eq(a[i].Lambda, b[i].Lambda) || a[i].Seen != b[i].Seen || a[i].Records != b[i].Records {
			return fmt.Errorf("member %d: intercept/λ/counts differ", i)
		}
		for j := range a[i].Coef {
			if !eq(a[i].Coef[j], b[i].Coef[j]) || !eq(a[i].Standardized[j], b[i].Standardized[j]) {
				return fmt.Errorf("member %d coefficient %d: %v != %v", i, j, a[i].Coef[j], b[i].Coef[j])
			}
		}
	}
	return nil
}

// runServer starts a NATS server (natstest.Options) on the given port, or
// a random one for -1, with its JetStream store in dir (a new temporary
// directory for "").
func runServer(t testing.TB, port int, dir string) *server.Server {
	t.Helper()
	o := natstest.Options(t)
	o.Port = port
	if dir != "" {
		o.StoreDir = dir
	}
	return natstest.RunServer(t, o)
}
