package daemon

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"lariat/config"
	"lariat/online"
	"lariat/sink"
)

// logitStream is a sparse logistic stream: x ~ N(0, I_d), y ~
// Bernoulli(σ(−1 + 1.5x1 − 1.2x2 + 0.8x3)) (a constructed stream, no
// published source; about a third positives).
type logitStream struct{ rng *rand.Rand }

func (s *logitStream) next(x []float64) float64 {
	for j := range x {
		x[j] = s.rng.NormFloat64()
	}
	if s.rng.Float64() < online.Sigmoid(-1+1.5*x[0]-1.2*x[1]+0.8*x[2]) {
		return 1
	}
	return 0
}

// TestThresholdTunedFPR tunes the alert threshold on the held-out ring to
// a target false-positive rate (online.ThresholdForFPR, Fawcett 2006) and
// checks the rate realized on fresh records from the same distribution,
// scored by the same ladder member, against the target within a binomial
// tolerance of 3σ, σ² = f(1−f)(1/n_h + 1/n_f) with n_h the held-out and
// n_f the fresh negatives (the held-out estimate and the fresh measurement
// are independent binomial proportions).
func TestThresholdTunedFPR(t *testing.T) {
	cases := []struct {
		target float64
		seed   uint64
	}{
		{0.01, 41}, {0.05, 42}, {0.05, 43}, {0.2, 44},
	}
	if testing.Short() {
		cases = cases[1:2]
	}
	const d, train, fresh = 6, 20000, 40000
	for _, tc := range cases {
		t.Run(fmt.Sprintf("target=%v/seed=%d", tc.target, tc.seed), func(t *testing.T) {
			m := driftModel("fpr", config.LossLogistic, featureNames(d), 4000)
			m.Holdout.Records = 2000
			m.Threshold = config.Threshold{Mode: config.ThresholdFPR, Value: 0.5, Target: tc.target}
			h := newHarness(t, m)
			s := &logitStream{rng: rand.New(rand.NewPCG(tc.seed, 9))}
			x := make([]float64, d)
			for range train {
				h.feed(x, s.next(x))
			}
			h.w.retune()
			tu := h.tuner()
			cur := h.w.current()
			nh := negatives(h.w.hold.Labels(nil))
			var nf, alarms int
			for range fresh {
				if s.next(x) != 0 {
					continue
				}
				nf++
				if online.Sigmoid(h.w.ladder.Eta(cur, x)) >= tu.value {
					alarms++
				}
			}
			got := float64(alarms) / float64(nf)
			sd := math.Sqrt(tc.target * (1 - tc.target) * (1/float64(nh) + 1/float64(nf)))
			t.Logf("threshold %.4f tuned on %d held-out negatives; realized FPR %.4f on %d fresh negatives (target %.3f, 3σ = %.4f)",
				tu.value, nh, got, nf, tc.target, 3*sd)
			if math.Abs(got-tc.target) > 3*sd {
				t.Errorf("realized FPR %.4f, want %.3f ± %.4f", got, tc.target, 3*sd)
			}
			if rows := h.d.store.ROC("fpr"); len(rows) < 2 {
				t.Errorf("ROC table has %d rows", len(rows))
			}
		})
	}
}

// TestThresholdTunedPrecision logs the precision realized on fresh records
// by a threshold tuned to a target precision (online.ThresholdForPrecision)
// and checks it within 3σ of the target, σ² = q(1−q)(1/a_h + 1/a_f) with a_h
// and a_f the held-out and fresh alarms.
func TestThresholdTunedPrecision(t *testing.T) {
	const d, train, fresh, target = 6, 20000, 40000, 0.8
	m := driftModel("prec", config.LossLogistic, featureNames(d), 4000)
	m.Holdout.Records = 2000
	m.Threshold = config.Threshold{Mode: config.ThresholdPrecision, Value: 0.5, Target: target}
	h := newHarness(t, m)
	s := &logitStream{rng: rand.New(rand.NewPCG(45, 9))}
	x := make([]float64, d)
	for range train {
		h.feed(x, s.next(x))
	}
	h.w.retune()
	tu := h.tuner()
	cur := h.w.current()
	probs := h.w.ladder.HoldoutPredictions(cur, h.w.hold, nil)
	ah := 0
	for _, p := range probs {
		if p >= tu.value {
			ah++
		}
	}
	var af, tp int
	for range fresh {
		y := s.next(x)
		if online.Sigmoid(h.w.ladder.Eta(cur, x)) >= tu.value {
			af++
			if y == 1 {
				tp++
			}
		}
	}
	got := float64(tp) / float64(af)
	sd := math.Sqrt(target * (1 - target) * (1/float64(ah) + 1/float64(af)))
	t.Logf("threshold %.4f (%d held-out alarms); realized precision %.4f over %d fresh alarms (target %.2f, 3σ = %.4f)",
		tu.value, ah, got, af, target, 3*sd)
	if math.Abs(got-target) > 3*sd {
		t.Errorf("realized precision %.4f, want %.2f ± %.4f", got, target, 3*sd)
	}
}

// TestThresholdModes checks the tuner's modes on the model goroutine's
// side: fixed keeps the value; a change of mode re-tunes at once; the
// document carries value, mode and target.
func TestThresholdModes(t *testing.T) {
	m := driftModel("modes", config.LossLogistic, featureNames(4), 2000)
	m.Threshold = config.Threshold{Mode: config.ThresholdFixed, Value: 0.7, Target: 0.01}
	h := newHarness(t, m)
	s := &logitStream{rng: rand.New(rand.NewPCG(46, 9))}
	x := make([]float64, 4)
	for range 6000 {
		h.feed(x, s.next(x))
	}
	tu := h.tuner()
	if tu.mode != "fixed" || tu.value != 0.7 || tu.target != 0.7 {
		t.Fatalf("fixed: mode %s value %v target %v, want fixed 0.7 0.7", tu.mode, tu.value, tu.target)
	}
	tu.set(config.ThresholdFPR, 0.1)
	if tu.value == 0.7 {
		t.Errorf("fpr: value still %v after the change", tu.value)
	}
	doc := &sink.ModelDoc{}
	tu.annotate(doc)
	if doc.Threshold == nil || doc.Threshold.Mode != "fpr" || doc.Threshold.Target != 0.1 || doc.Threshold.Value != tu.value {
		t.Errorf("document threshold %+v", doc.Threshold)
	}
	tu.set(config.ThresholdFixed, 0.3)
	if tu.value != 0.3 {
		t.Errorf("fixed 0.3: value %v", tu.value)
	}
}

// TestThresholdFile checks the overrides file: missing, written atomically
// and read back, several models, a corrupt file (an error naming the file;
// the next save replaces it) and an invalid entry.
func TestThresholdFile(t *testing.T) {
	dir := t.TempDir()
	got, err := readThresholdOverrides(dir)
	if err != nil || got != nil {
		t.Fatalf("missing file: %v, %v", got, err)
	}
	if err := saveThresholdOverride(dir, "a", thresholdOverride{Mode: "fpr", Target: 0.02}); err != nil {
		t.Fatal(err)
	}
	if err := saveThresholdOverride(dir, "b", thresholdOverride{Mode: "fixed", Target: 0.4}); err != nil {
		t.Fatal(err)
	}
	got, err = readThresholdOverrides(dir)
	if err != nil || len(got) != 2 || got["a"].Target != 0.02 || got["b"].Mode != "fixed" {
		t.Fatalf("read back %v, %v", got, err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("temporary files left: %v", entries)
	}
	path := filepath.Join(dir, thresholdFile)
	if err := os.WriteFile(path, []byte(`{"models": {"a": `), 0o600); err != nil {
		t.Fatal(err)
	}
	_, err = readThresholdOverrides(dir)
	var syn *json.SyntaxError
	if err == nil || !errors.As(err, &syn) || !strings.Contains(err.Error(), path) {
		t.Errorf("corrupt file: error %v, want a syntax error naming %s", err, path)
	}
	if err := saveThresholdOverride(dir, "c", thresholdOverride{Mode: "precision", Target: 0.9}); err != nil {
		t.Fatalf("save over a corrupt file: %v", err)
	}
	if got, err = readThresholdOverrides(dir); err != nil || len(got) != 1 {
		t.Errorf("after replacing the corrupt file: %v, %v", got, err)
	}
}

// TestThresholdCheck is the validation table of SetThresholdTarget.
func TestThresholdCheck(t *testing.T) {
	for _, tc := range []struct {
		mode   string
		target float64
		ok     bool
	}{
		{"fixed", 0.5, true}, {"fixed", 0, false}, {"fixed", 1, false},
		{"fpr", 0.01, true}, {"fpr", 0, false}, {"fpr", 1, false}, {"fpr", 1.5, false}, {"fpr", math.NaN(), false},
		{"precision", 0.9, true}, {"precision", 1, false}, {"precision", -0.1, false}, {"roc", 0.5, false},
	} {
		err := checkThreshold(tc.mode, tc.target)
		if (err == nil) != tc.ok {
			t.Errorf("checkThreshold(%q, %v) = %v, want ok %v", tc.mode, tc.target, err, tc.ok)
		}
	}
}

// TestThresholdSetter drives Daemon.SetThresholdTarget directly on a
// running daemon: errors for an unknown or linear model and a bad target;
// the change reaches the model goroutine (model JSON) and the file, and a
// daemon restarted on the same data_dir starts from it.
func TestThresholdSetter(t *testing.T) {
	const name = "setter"
	m := testModel(name, "test."+name, config.LossLogistic)
	m.Queue = 4000
	lin := testModel("setter-linear", "test.setter-linear", config.LossSquared)
	cfg := testConfig(t, m, lin)
	names := featureNames(6)
	run := func(seed uint64, check func(td *testDaemon), opts ...Option) {
		td := startDaemon(t, cfg, opts...)
		nc := connect(t, td.NATSURL())
		waitFor(t, 10*time.Second, td.Ready)
		for _, r := range logisticRecords(names, 2000, seed) {
			nc.Publish(m.Subject, r)
		}
		nc.Flush()
		check(td)
		if err := td.stop(t); err != nil {
			t.Fatal(err)
		}
	}
	want := func(td *testDaemon, mode string, target float64) {
		waitFor(t, 10*time.Second, func() error {
			doc, _, err := getDoc(td.Daemon, name)
			if err != nil {
				return err
			}
			if th := doc.Threshold; th == nil || th.Mode != mode || th.Target != target {
				return fmt.Errorf("threshold %+v, want %s %v", th, mode, target)
			}
			return nil
		})
	}
	run(71, func(td *testDaemon) {
		for _, tc := range []struct {
			model, mode string
			target      float64
			is          error
		}{
			{"nope", "fpr", 0.1, sink.ErrUnknownModel},
			{"setter-linear", "fpr", 0.1, sink.ErrUnknownModel},
			{name, "fpr", 2, errThreshold},
			{name, "fixed", 0, errThreshold},
		} {
			if err := td.SetThresholdTarget(tc.model, tc.mode, tc.target); !errors.Is(err, tc.is) {
				t.Errorf("SetThresholdTarget(%s, %s, %v) = %v, want %v", tc.model, tc.mode, tc.target, err, tc.is)
			}
		}
		want(td, "fixed", 0.5)
		if err := td.SetThresholdTarget(name, "precision", 0.7); err != nil {
			t.Fatal(err)
		}
		want(td, "precision", 0.7)
	})
	run(72, func(td *testDaemon) { want(td, "precision", 0.7) })
	// A corrupt file: logged, and the configuration applies.
	if err := os.WriteFile(filepath.Join(cfg.DataDir, thresholdFile), []byte("{not json"), 0o600); err != nil {
		t.Fatal(err)
	}
	var logs syncBuffer
	run(73, func(td *testDaemon) { want(td, "fixed", 0.5) },
		WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	if s := logs.String(); !strings.Contains(s, "corrupt") || !strings.Contains(s, thresholdFile) {
		t.Errorf("no clear log line about the corrupt file:\n%s", s)
	}
}

// syncBuffer is a bytes.Buffer safe for concurrent writes (a logger's).
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}
