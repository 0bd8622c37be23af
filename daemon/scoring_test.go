package daemon

import (
	"math"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/online"
	"lariat/sink"
)

// scoringFixture returns a daemon (not run) with one logistic model that
// scores, its scorer, and a published snapshot with 7 features of which 6
// have a nonzero coefficient, means 1 and threshold 0.6.
func scoringFixture(t *testing.T) (*Daemon, *scoring) {
	t.Helper()
	m := driftModel("score", config.LossLogistic, featureNames(7), 1000)
	m.ScoreSubject = "test.score.unlabeled"
	cfg := testConfig(t, m)
	d, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	w := d.byName["score"]
	names := featureNames(7)
	model := &online.Model{
		Loss:      config.LossLogistic,
		Intercept: -2,
		Coef:      []float64{1, -2, 0.5, 3, -0.25, 0.1, 0},
		Mean:      []float64{1, 1, 1, 1, 1, 1, 1},
		Std:       []float64{1, 1, 1, 1, 1, 1, 1},
	}
	doc := &sink.ModelDoc{Model: "score", Version: 3, Loss: config.LossLogistic,
		Threshold: &sink.Threshold{Value: 0.6, Mode: "fixed", Target: 0.6}, Records: sink.RecordCounts{Window: 800, Holdout: 200}}
	w.snap.Store(&pipeline.Snapshot{Doc: doc, Model: model, Names: names})
	s := w.scoring
	if s == nil {
		t.Fatal("no scorer")
	}
	return d, s
}

// TestScoringPredictionAlert: a record over the threshold gives one
// prediction alert with the probability, the threshold and the five
// largest |coef·(x − mean)| in order; one under it gives none.
func TestScoringPredictionAlert(t *testing.T) {
	d, s := scoringFixture(t)
	// η = −2 + Σ coef_j x_j; contributions coef·(x − 1).
	over := []byte(`{"t": 5000, "x": {"x01": 2, "x02": 0, "x03": 3, "x04": 2, "x05": 5, "x06": 16, "x07": 9}}`)
	under := []byte(`{"x": {"x01": 1, "x02": 1, "x03": 1, "x04": 1, "x05": 1, "x06": 1}}`)
	s.handle(&nats.Msg{Subject: "test.score.unlabeled", Data: under})
	if n := len(d.store.Alerts("score")); n != 0 {
		t.Fatalf("%d alerts for a record under the threshold", n)
	}
	s.handle(&nats.Msg{Subject: "test.score.unlabeled", Data: over})
	as := d.store.Alerts("score")
	if len(as) != 1 {
		t.Fatalf("%d alerts, want 1", len(as))
	}
	a := as[0]
	eta := -2 + 1*2 - 2*0 + 0.5*3 + 3*2 - 0.25*5 + 0.1*16
	p := 1 / (1 + math.Exp(-eta))
	want := []string{"x04", "x02", "x06", "x01", "x03"} // |3|, |2|, |1.5|, then |1| ties in column order
	if a.Kind != sink.KindPrediction || math.Abs(*a.Probability-p) > 1e-12 || a.Threshold != 0.6 || a.Seq != 2 ||
		!a.Time.Equal(time.UnixMilli(5000)) || len(a.Features) != 5 {
		t.Fatalf("alert %+v (p want %v)", a, p)
	}
	for i, n := range want {
		if a.Features[i] != n {
			t.Errorf("features %v, want %v", a.Features, want)
			break
		}
	}
	if c := a.Contributions["x04"]; c != 3 {
		t.Errorf("contribution of x04 = %v, want 3·(2 − 1) = 3", c)
	}
	if _, ok := a.Contributions["x05"]; ok {
		t.Errorf("x05 (|−0.25·4| = 1, sixth by column order) among the top five: %v", a.Contributions)
	}
	if err := a.Validate(); err != nil {
		t.Error(err)
	}
}

// TestScoringAllocs: scoring a record under the threshold does not
// allocate.
func TestScoringAllocs(t *testing.T) {
	_, s := scoringFixture(t)
	msg := &nats.Msg{Subject: "test.score.unlabeled", Data: []byte(`{"v": [1, 1, 1, 1, 1, 1, 1]}`)}
	s.handle(msg)
	if n := testing.AllocsPerRun(200, func() { s.handle(msg) }); n != 0 {
		t.Errorf("scoring allocates %v per record", n)
	}
}

// TestScoringBucket: a burst over the threshold is cut to the bucket of 10
// (README.md, "Alert thresholds (logistic models)") and the rest counted.
func TestScoringBucket(t *testing.T) {
	d, s := scoringFixture(t)
	over := &nats.Msg{Subject: "test.score.unlabeled", Data: []byte(`{"v": [3, 3, 3, 3, 3, 3, 3]}`)}
	for range 25 {
		s.handle(over)
	}
	if n := len(d.store.Alerts("score")); n != 10 {
		t.Errorf("%d alerts from a burst of 25, want 10", n)
	}
	if got := metricValue(t, d, "lariat_prediction_alerts_suppressed_total", map[string]string{"model": "score"}); got != 15 {
		t.Errorf("suppressed %v, want 15", got)
	}
	if got := metricValue(t, d, "lariat_alerts_total", map[string]string{"model": "score", "kind": "prediction"}); got != 10 {
		t.Errorf("lariat_alerts_total{kind=prediction} = %v", got)
	}
}

// BenchmarkScoring measures scoring one unlabeled record (under the
// threshold: decode and evaluate).
func BenchmarkScoring(b *testing.B) {
	m := driftModel("score", config.LossLogistic, featureNames(7), 1000)
	m.ScoreSubject = "test.score.unlabeled"
	d, err := New(testConfig(b, m))
	if err != nil {
		b.Fatal(err)
	}
	w := d.byName["score"]
	model := &online.Model{Loss: config.LossLogistic, Coef: make([]float64, 7), Mean: make([]float64, 7), Std: make([]float64, 7)}
	w.snap.Store(&pipeline.Snapshot{Doc: &sink.ModelDoc{Threshold: &sink.Threshold{Value: 0.9}}, Model: model, Names: featureNames(7)})
	s := w.scoring
	msg := &nats.Msg{Data: []byte(`{"x": {"x01": 1, "x02": 2, "x03": 3, "x04": 4, "x05": 5, "x06": 6, "x07": 7}}`)}
	b.ReportAllocs()
	for b.Loop() {
		s.handle(msg)
	}
}
