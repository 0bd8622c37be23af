package daemon

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestPredict checks POST /v1/models/{name}/predict (the daemon's Predictor,
// on the published online.Model snapshot) against sink.Predict on the same
// published document, for a linear and a logistic model, with a missing
// channel and a channel the model does not know.
func TestPredict(t *testing.T) {
	tr := sparseTruth(8)
	lin := testModel("pred-lin", "test.pred.lin", config.LossSquared)
	logit := testModel("pred-log", "test.pred.log", config.LossLogistic)
	td := startDaemon(t, testConfig(t, lin, logit), withoutIdle())
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	for _, m := range []config.Model{lin, logit} {
		for _, rec := range tr.records(1000, m.Logistic(), 11) {
			nc.Publish(m.Subject, rec)
		}
	}
	nc.Flush()
	body := []byte(`{"x":{"x00":0.5,"x01":-1,"x02":2,"x03":0.25,"x04":-0.5,"x05":1,"x06":0.1,"unknown":7}}`) // x07 missing
	xmap := map[string]float64{"x00": 0.5, "x01": -1, "x02": 2, "x03": 0.25, "x04": -0.5, "x05": 1, "x06": 0.1}
	for _, m := range []config.Model{lin, logit} {
		t.Run(m.Loss, func(t *testing.T) {
			natstest.WaitFor(t, 20*time.Second, func() error {
				doc, _, err := getDoc(td.Daemon, m.Name)
				if err != nil {
					return err
				}
				if doc.Records.Seen != 800 {
					return fmt.Errorf("seen %d", doc.Records.Seen)
				}
				got, err := postPredict(td.Daemon, m.Name, body)
				if err != nil {
					return err
				}
				if got.Version != doc.Version {
					return fmt.Errorf("versions %d and %d: retry", got.Version, doc.Version)
				}
				want, err := sink.Predict(doc, xmap)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(got.Eta-want.Eta) > 1e-9*math.Max(1, math.Abs(want.Eta)) {
					t.Errorf("eta %v, sink.Predict says %v", got.Eta, want.Eta)
				}
				if len(got.Contributions) != len(doc.Coefficients) {
					t.Errorf("%d contributions for %d nonzero coefficients", len(got.Contributions), len(doc.Coefficients))
				}
				sum := doc.Intercept
				for _, c := range got.Contributions {
					sum += c
				}
				if math.Abs(sum-got.Eta) > 1e-9*math.Max(1, math.Abs(sum)) {
					t.Errorf("intercept + contributions = %v, eta %v", sum, got.Eta)
				}
				if (got.Probability != nil) != m.Logistic() || (m.Logistic() && (got.Threshold == nil || got.Positive == nil)) {
					t.Errorf("logistic fields: %+v", got)
				}
				return nil
			})
		})
	}
	// Errors: unknown model 404, bad body 400.
	for _, tc := range []struct {
		model, body string
		code        int
	}{
		{"nope", `{"x":{}}`, http.StatusNotFound},
		{"pred-lin", `{"x":{"x00":"a"}}`, http.StatusBadRequest},
		{"pred-lin", `{"x":`, http.StatusBadRequest},
	} {
		resp, err := http.Post("http://"+td.HTTPAddr()+"/v1/models/"+tc.model+"/predict", "application/json", bytes.NewReader([]byte(tc.body)))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != tc.code {
			t.Errorf("%s %s: status %d, want %d", tc.model, tc.body, resp.StatusCode, tc.code)
		}
	}
}

func postPredict(d *Daemon, name string, body []byte) (*sink.Prediction, error) {
	resp, err := http.Post("http://"+d.HTTPAddr()+"/v1/models/"+name+"/predict", "application/json", bytes.NewReader(body))
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("predict %s: %s: %s", name, resp.Status, b)
	}
	var p sink.Prediction
	return &p, json.Unmarshal(b, &p)
}

// TestVersionsAcrossRestart runs the daemon twice on the same data
// directory: the second run's versions continue after the first's (read
// back from the key-value bucket).
func TestVersionsAcrossRestart(t *testing.T) {
	m := testModel("restart", "test.restart", config.LossSquared)
	cfg := testConfig(t, m)
	var last uint64
	for run := range 2 {
		td := startDaemon(t, cfg)
		nc := connect(t, td.NATSURL())
		natstest.WaitFor(t, 10*time.Second, td.Ready)
		for _, rec := range sparseTruth(4).records(600, false, uint64(run)) {
			nc.Publish(m.Subject, rec)
		}
		nc.Flush()
		var doc *sink.ModelDoc
		natstest.WaitFor(t, 10*time.Second, func() error {
			var err error
			doc, _, err = getDoc(td.Daemon, "restart")
			return err
		})
		if doc.Version <= last {
			t.Errorf("run %d: first version seen %d, not after the previous run's %d", run, doc.Version, last)
		}
		if err := td.stop(t); err != nil {
			t.Fatal(err)
		}
		final, _ := td.Store().Model("restart")
		last = final.Version
		nc.Close()
	}
}
