package daemon

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/sink/natstest"
)

// alertSink collects the alerts published on a subject.
type alertSink struct {
	mu   sync.Mutex
	raw  []map[string]any
	msgs []sink.Alert
}

func subscribeAlerts(t *testing.T, nc *nats.Conn, subject string) *alertSink {
	t.Helper()
	s := &alertSink{}
	sub, err := nc.Subscribe(subject, func(m *nats.Msg) {
		var a sink.Alert
		var raw map[string]any
		if err := json.Unmarshal(m.Data, &a); err != nil {
			t.Errorf("alert JSON: %v", err)
			return
		}
		json.Unmarshal(m.Data, &raw)
		s.mu.Lock()
		s.msgs = append(s.msgs, a)
		s.raw = append(s.raw, raw)
		s.mu.Unlock()
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { sub.Unsubscribe() })
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	return s
}

// of returns the alerts of kind received so far, with their raw JSON.
func (s *alertSink) of(kind sink.AlertKind) ([]sink.Alert, []map[string]any) {
	s.mu.Lock()
	defer s.mu.Unlock()
	var as []sink.Alert
	var raw []map[string]any
	for i, a := range s.msgs {
		if a.Kind == kind {
			as = append(as, a)
			raw = append(raw, s.raw[i])
		}
	}
	return as, raw
}

// namedRecord encodes a record with named features a, b, c, a label and a
// time in Unix ms.
func namedRecord(names []string, x []float64, y float64, labeled bool, tms int64) []byte {
	r := record.Record{X: make([]float64, len(names)), Y: math.NaN(), T: tms, HasT: true}
	for j := range names {
		r.X[j] = round5(x[j])
	}
	if labeled {
		r.Y = y
	}
	return record.AppendJSON(nil, names, &r)
}

// round5 rounds v to 5 decimals, as the tests' records carry their values.
func round5(v float64) float64 { return math.Round(v*1e5) / 1e5 }

// TestAlertEndToEnd runs a daemon on an embedded NATS server: a feature's
// mean shifts by 5σ, and the data alert must arrive on
// lariat.alert.<model> with its fields, be counted in lariat_alerts_total
// and listed by GET /v1/alerts; the 1-hour cooldown must suppress the
// repeats the later comparisons detect. It also checks the λ reporting of
// the model JSON, the ladder endpoint and the metrics.
func TestAlertEndToEnd(t *testing.T) {
	const name = "e2e-alert"
	m := testModel(name, "test."+name, config.LossSquared)
	m.Window.Records = 400 // n_s = 500
	m.Holdout.Records = 200
	m.Retune.Every = 100
	m.Drift.Cooldown = config.Duration(time.Hour)
	m.Queue = 4000
	td := startDaemon(t, testConfig(t, m))
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	alerts := subscribeAlerts(t, nc, "lariat.alert."+name)

	names := []string{"a", "b", "c"}
	rng := rand.New(rand.NewPCG(8, 8))
	x := make([]float64, 3)
	t0 := time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC).UnixMilli()
	sent := 0 // record i carries t = t0 + i seconds
	send := func(n int, shift float64) {
		for range n {
			for j := range x {
				x[j] = rng.NormFloat64()
			}
			y := 1 + 2*x[0] - x[1] + 0.3*rng.NormFloat64()
			x[2] += shift
			nc.Publish(m.Subject, namedRecord(names, x, y, true, t0+int64(sent)*1000))
			sent++
		}
		if err := nc.Flush(); err != nil {
			t.Fatal(err)
		}
	}
	accepted := func(n float64) func() error {
		return func() error {
			if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": name}); got < n {
				return fmt.Errorf("accepted %v of %v", got, n)
			}
			return nil
		}
	}
	send(1500, 0) // warm after 500 train records; one comparison before the shift
	natstest.WaitFor(t, 20*time.Second, accepted(1500))
	natstest.WaitFor(t, 10*time.Second, func() error { // published: alerts name the features
		_, _, err := getDoc(td.Daemon, name)
		return err
	})
	if as, _ := alerts.of(sink.KindData); len(as) != 0 {
		t.Fatalf("data alerts before the shift: %+v", as)
	}
	send(1500, 5)
	natstest.WaitFor(t, 20*time.Second, accepted(3000))
	var got []sink.Alert
	var raw []map[string]any
	natstest.WaitFor(t, 10*time.Second, func() error {
		if got, raw = alerts.of(sink.KindData); len(got) == 0 {
			return fmt.Errorf("no data alert on the bus")
		}
		return nil
	})
	a := got[0]
	t.Logf("data alert: %s", mustJSON(t, raw[0]))
	for _, key := range []string{"model", "kind", "severity", "statistic", "threshold", "windows", "features", "time", "seq", "message"} {
		if _, ok := raw[0][key]; !ok {
			t.Errorf("alert JSON has no %q", key)
		}
	}
	if a.Model != name || a.Severity != sink.SeverityWarning || len(a.Features) != 1 || a.Features[0] != "c" ||
		a.Statistic <= a.Threshold || a.Threshold != m.Drift.PSI || a.Seq < 1500 ||
		a.Windows.Train == 0 || a.Windows.Holdout == 0 || a.Windows.Detector != 500 {
		t.Errorf("alert %+v", a)
	}
	if want := time.UnixMilli(t0 + int64(a.Seq-1)*1000); !a.Time.Equal(want) {
		t.Errorf("alert time %v, want the triggering record's t %v (record %d)", a.Time, want, a.Seq)
	}

	// Cooldown: later comparisons detect the shift again, but nothing more
	// goes out within the hour (of record time: the 1500 shifted records
	// span 25 minutes).
	w := td.byName[name]
	var st pipeline.DriftCounts
	w.exec(func() { st = w.pipe.DriftCounts() })
	// Every alert the model sent is counted before exec returns (sendAlert
	// runs on the model goroutine), so the counter bounds what the bus can
	// still deliver: no waiting for stray alerts.
	out := metricValue(t, td.Daemon, "lariat_alerts_total", map[string]string{"model": name, "kind": "data"})
	got, _ = alerts.of(sink.KindData)
	t.Logf("data drift detected %d times, %d suppressed by the cooldown, %v sent, %d on the bus", st.Data.Detected, st.Data.Suppressed, out, len(got))
	if out != 1 || len(got) != 1 || st.Data.Suppressed < 1 {
		t.Errorf("sent %v data alerts (%d on the bus) with %d suppressed; want 1 sent and the repeats suppressed", out, len(got), st.Data.Suppressed)
	}
	var list struct{ Alerts []sink.Alert }
	getJSON(t, "http://"+td.HTTPAddr()+"/v1/alerts?model="+name, &list)
	found := false
	for _, la := range list.Alerts {
		found = found || la.Kind == sink.KindData && la.Seq == a.Seq
	}
	if !found {
		t.Errorf("GET /v1/alerts lacks the data alert: %+v", list.Alerts)
	}

	// λ reporting: model JSON, ladder endpoint, metrics agree.
	doc, _, err := getDoc(td.Daemon, name)
	if err != nil {
		t.Fatal(err)
	}
	if len(doc.Ladder) == 0 || doc.LambdaIndex < 0 || doc.LambdaIndex >= len(doc.Ladder) ||
		float64(doc.Ladder[doc.LambdaIndex].Lambda) != doc.Penalty.Lambda || doc.Holdout.Records == 0 {
		t.Errorf("λ reporting: index %d, λ %v, ladder %+v, holdout %+v", doc.LambdaIndex, doc.Penalty.Lambda, doc.Ladder, doc.Holdout)
	}
	var lad struct {
		Version     uint64
		LambdaIndex int `json:"lambda_index"`
		Ladder      []sink.LadderEntry
	}
	getJSON(t, "http://"+td.HTTPAddr()+"/v1/models/"+name+"/ladder", &lad)
	if len(lad.Ladder) != len(doc.Ladder) || lad.Version < doc.Version {
		t.Errorf("ladder endpoint %+v vs doc version %d", lad, doc.Version)
	}
	natstest.WaitFor(t, 5*time.Second, func() error {
		cur, _, err := getDoc(td.Daemon, name)
		if err != nil {
			return err
		}
		l := metricValue(t, td.Daemon, "lariat_lambda", map[string]string{"model": name})
		i := metricValue(t, td.Daemon, "lariat_lambda_index", map[string]string{"model": name})
		if l != cur.Penalty.Lambda || int(i) != cur.LambdaIndex {
			return fmt.Errorf("metrics λ %v index %v, doc %v %d", l, i, cur.Penalty.Lambda, cur.LambdaIndex)
		}
		return nil
	})
}

// getJSON GETs url and decodes a 200 answer into v.
func getJSON(t *testing.T, url string, v any) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %s: %s", url, resp.Status, b)
	}
	if err := json.Unmarshal(b, v); err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
}

func mustJSON(t *testing.T, v any) string {
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// putThreshold sends PUT /v1/models/{name}/threshold with the token ("" =
// no Authorization header) and returns the status.
func putThreshold(t *testing.T, addr, name, token, body string) int {
	t.Helper()
	req, err := http.NewRequest(http.MethodPut, "http://"+addr+"/v1/models/"+name+"/threshold", bytes.NewBufferString(body))
	if err != nil {
		t.Fatal(err)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	t.Logf("PUT threshold (token %q): %s %s", token, resp.Status, bytes.TrimSpace(b))
	return resp.StatusCode
}

// logisticRecords returns n labeled records over names of a sparse
// logistic stream: x ~ N(0, I_d), y ~ Bernoulli(σ(−1 + 1.5x1 − 1.2x2 +
// 0.8x3)) (a constructed stream, no published source; the pipeline's
// threshold tests use the same one).
func logisticRecords(names []string, n int, seed uint64) [][]byte {
	rng := rand.New(rand.NewPCG(seed, 9))
	x := make([]float64, len(names))
	out := make([][]byte, n)
	for i := range out {
		for j := range x {
			x[j] = rng.NormFloat64()
		}
		y := 0.0
		if rng.Float64() < online.Sigmoid(-1+1.5*x[0]-1.2*x[1]+0.8*x[2]) {
			y = 1
		}
		out[i] = namedRecord(names, x, y, true, int64(i))
	}
	return out
}

// TestThresholdEndToEnd changes a logistic model's threshold target over
// authenticated HTTP: 401 without a token and with a wrong one, 202 with
// the right one; the model JSON then shows the new mode and target, and
// still does after the daemon restarts on the same data_dir.
func TestThresholdEndToEnd(t *testing.T) {
	const name, token = "e2e-threshold", "s3cret-admin"
	m := testModel(name, "test."+name, config.LossLogistic)
	m.Queue = 4000
	m.Threshold = config.Threshold{Mode: config.ThresholdFixed, Value: 0.5, Target: 0.01}
	cfg := testConfig(t, m)
	tokFile := filepath.Join(t.TempDir(), "admin-token")
	if err := os.WriteFile(tokFile, []byte(token+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	cfg.HTTP.AdminTokenFile = tokFile
	names := featureNames(6)

	run := func(seed uint64, check func(td *testDaemon)) {
		td := startDaemon(t, cfg)
		nc := connect(t, td.NATSURL())
		natstest.WaitFor(t, 10*time.Second, td.Ready)
		for _, r := range logisticRecords(names, 3000, seed) {
			nc.Publish(m.Subject, r)
		}
		nc.Flush()
		natstest.WaitFor(t, 20*time.Second, func() error {
			_, _, err := getDoc(td.Daemon, name)
			return err
		})
		check(td)
		if err := td.stop(t); err != nil {
			t.Fatalf("stop: %v", err)
		}
	}
	wantThreshold := func(td *testDaemon, mode string, target float64) {
		natstest.WaitFor(t, 10*time.Second, func() error {
			doc, _, err := getDoc(td.Daemon, name)
			if err != nil {
				return err
			}
			if th := doc.Threshold; th == nil || th.Mode != mode || th.Target != target || !(th.Value > 0 && th.Value <= 1) {
				return fmt.Errorf("threshold %+v, want mode %s target %v", th, mode, target)
			}
			return nil
		})
	}
	body := `{"mode":"fpr","target":0.02}`
	run(51, func(td *testDaemon) {
		wantThreshold(td, "fixed", 0.5)
		if c := putThreshold(t, td.HTTPAddr(), name, "", body); c != http.StatusUnauthorized {
			t.Errorf("no token: %d, want 401", c)
		}
		if c := putThreshold(t, td.HTTPAddr(), name, "wrong", body); c != http.StatusUnauthorized {
			t.Errorf("wrong token: %d, want 401", c)
		}
		wantThreshold(td, "fixed", 0.5)
		if c := putThreshold(t, td.HTTPAddr(), name, token, body); c != http.StatusAccepted {
			t.Fatalf("right token: %d, want 202", c)
		}
		wantThreshold(td, "fpr", 0.02)
		doc, _, _ := getDoc(td.Daemon, name)
		t.Logf("after the change: threshold %+v", doc.Threshold)
		if rows := td.Store().ROC(name); len(rows) < 2 {
			t.Errorf("ROC table: %d rows", len(rows))
		}
	})
	b, err := os.ReadFile(filepath.Join(cfg.DataDir, thresholdFile))
	if err != nil {
		t.Fatalf("override file: %v", err)
	}
	t.Logf("%s: %s", thresholdFile, bytes.TrimSpace(b))
	run(52, func(td *testDaemon) {
		wantThreshold(td, "fpr", 0.02)
	})
}

// TestScoringEndToEnd trains a logistic model, then publishes unlabeled
// records on its score_subject: one far on the positive side must raise a
// prediction alert on lariat.alert.<model> with its probability and top
// contributions, one far on the negative side none, and a burst is
// rate-limited by the token bucket (suppressed ones counted). Without an
// admin token a threshold change is refused with 403.
func TestScoringEndToEnd(t *testing.T) {
	const name = "e2e-score"
	m := testModel(name, "test."+name, config.LossLogistic)
	m.ScoreSubject = "test." + name + ".score"
	m.Queue = 4000
	td := startDaemon(t, testConfig(t, m))
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	alerts := subscribeAlerts(t, nc, "lariat.alert."+name)
	names := featureNames(6)
	for _, r := range logisticRecords(names, 3000, 61) {
		nc.Publish(m.Subject, r)
	}
	nc.Flush()
	natstest.WaitFor(t, 20*time.Second, func() error {
		_, _, err := getDoc(td.Daemon, name)
		return err
	})
	if c := putThreshold(t, td.HTTPAddr(), name, "any", `{"mode":"fixed","target":0.3}`); c != http.StatusForbidden {
		t.Errorf("threshold change without an admin token configured: %d, want 403", c)
	}

	neg := namedRecord(names, []float64{-3, 3, -3, 0, 0, 0}, 0, false, 1000)
	pos := namedRecord(names, []float64{3, -3, 3, 0.1, 0, 0}, 0, false, 2000)
	scoringStart := time.Now()
	nc.Publish(m.ScoreSubject, neg)
	// The score subscription starts with the first publication; publish
	// until the alert shows the subscription is live.
	var got []sink.Alert
	var raw []map[string]any
	natstest.WaitFor(t, 10*time.Second, func() error {
		if got, raw = alerts.of(sink.KindPrediction); len(got) > 0 {
			return nil
		}
		nc.Publish(m.ScoreSubject, pos)
		nc.Flush()
		time.Sleep(50 * time.Millisecond)
		return fmt.Errorf("no prediction alert")
	})
	a := got[0]
	t.Logf("prediction alert: %s", mustJSON(t, raw[0]))
	if a.Probability == nil || *a.Probability < 0.5 || a.Statistic != *a.Probability || a.Threshold != 0.5 ||
		len(a.Features) == 0 || len(a.Features) > 5 || len(a.Contributions) != len(a.Features) || a.Time.IsZero() {
		t.Errorf("alert %+v", a)
	}
	for i := 1; i < len(a.Features); i++ {
		if math.Abs(a.Contributions[a.Features[i]]) > math.Abs(a.Contributions[a.Features[i-1]]) {
			t.Errorf("features not ordered by |contribution|: %v %v", a.Features, a.Contributions)
		}
	}
	if _, ok := a.Contributions["x01"]; !ok {
		t.Errorf("x01 (the strongest feature) not among the contributions %v", a.Contributions)
	}
	for range 40 {
		nc.Publish(m.ScoreSubject, pos)
	}
	nc.Flush()
	labels := map[string]string{"model": name}
	natstest.WaitFor(t, 10*time.Second, func() error {
		if s := metricValue(t, td.Daemon, "lariat_prediction_alerts_suppressed_total", labels); s < 20 {
			return fmt.Errorf("suppressed %v", s)
		}
		return nil
	})
	// The bucket refills on the wall clock, one token a second: bound the
	// alerts sent by the time that has actually passed since the first
	// record was scored, so a slow run (-race) cannot make this flaky. The
	// bucket's arithmetic itself is tested with a passed-in clock
	// (pipeline.TestWatchTokenBucket).
	elapsed := time.Since(scoringStart)
	sent := metricValue(t, td.Daemon, "lariat_alerts_total", map[string]string{"model": name, "kind": "prediction"})
	got, _ = alerts.of(sink.KindPrediction)
	scored := metricValue(t, td.Daemon, "lariat_records_scored_total", labels)
	sup := metricValue(t, td.Daemon, "lariat_prediction_alerts_suppressed_total", labels)
	t.Logf("scored %v in %v, prediction alerts sent %v (%d on the bus so far), suppressed %v", scored, elapsed, sent, len(got), sup)
	if bound := 10 + math.Ceil(elapsed.Seconds()); sent > bound { // the bucket of 10 (README.md), plus one a second
		t.Errorf("%v prediction alerts passed the bucket of 10 in %v (bound %v)", sent, elapsed, bound)
	}
	if float64(len(got)) > sent {
		t.Errorf("%d prediction alerts on the bus, %v sent", len(got), sent)
	}
	for _, a := range got {
		if *a.Probability < 0.5 {
			t.Errorf("alert for p = %v below the threshold", *a.Probability)
		}
	}
}
