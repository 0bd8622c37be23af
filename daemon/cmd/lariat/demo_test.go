package main

import (
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"net/http"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"lariat/sink"
)

// TestRunDemo runs the demo for a few seconds on random ports and checks the
// banner and the summary.
func TestRunDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("demo: a few seconds")
	}
	var out bytes.Buffer
	err := runDemo(context.Background(), demoOptions{
		Duration: 4 * time.Second, Rate: 400, FaultAfter: -1, Out: &out,
		Data: t.TempDir(), NATSListen: "127.0.0.1:-1", HTTPListen: "127.0.0.1:0",
	})
	if err != nil {
		t.Fatalf("runDemo: %v\n%s", err, out.String())
	}
	s := out.String()
	for _, want := range []string{"INVENTED", "lariat pull pump-trip --from http://127.0.0.1:", "pump-trip", "bearing-temp", "version"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
}

// TestDemoTalks runs the demo for a few seconds at 400 records/s with a
// narration line every 500 ms and the fault after 1 s, and checks the
// narration lines, the alert counts and the fault line of the summary.
// Detection within the run is not asserted: the models need a few thousand
// records before their drift detectors can fire, more than these seconds
// give (see the report of the measured 4-minute run).
func TestDemoTalks(t *testing.T) {
	if testing.Short() {
		t.Skip("demo: a few seconds")
	}
	var out bytes.Buffer
	err := runDemo(context.Background(), demoOptions{
		Duration: 4 * time.Second, Rate: 400, FaultAfter: time.Second, Every: 500 * time.Millisecond,
		Out: &out, Data: t.TempDir(), NATSListen: "127.0.0.1:-1", HTTPListen: "127.0.0.1:0",
	})
	if err != nil {
		t.Fatalf("runDemo: %v\n%s", err, out.String())
	}
	s := out.String()
	num := `(?:-?[0-9.e+-]+|n/a)`
	for _, re := range []string{
		`(?m)^\d+:\d\d pump-trip +v\d+ λ#\d+ nonzero \d+ loss ` + num + ` AUC ` + num + `, ` + num + ` rec/s, \d+ flagged$`,
		`(?m)^\d+:\d\d bearing-temp +v\d+ λ#\d+ nonzero \d+ loss ` + num + ` R² ` + num + `, ` + num + ` rec/s$`,
		`(?m)^  alerts pump-trip +performance \d+, data \d+, model \d+, prediction \d+$`,
		`(?m)^  alerts bearing-temp +performance \d+, data \d+, model \d+, prediction \d+$`,
		`(?m)^  fault: began after 1s, (detected by bearing-temp [0-9hms.]+ later \(\d+ records\)|not detected in the [0-9hms.]+ since)$`,
	} {
		if !regexp.MustCompile(re).MatchString(s) {
			t.Errorf("output lacks a line matching %s:\n%s", re, s)
		}
	}
	// A third of the 400 records/s go to each training stream (the third
	// third are the unlabeled readings scored for pump-trip).
	var rates []int
	for _, m := range regexp.MustCompile(`(?m)^\d+:\d\d bearing-temp .*, (\d+) rec/s$`).FindAllStringSubmatch(s, -1) {
		r, _ := strconv.Atoi(m[1])
		rates = append(rates, r)
	}
	if len(rates) == 0 || rates[len(rates)-1] < 90 || rates[len(rates)-1] > 180 {
		t.Errorf("bearing-temp rates %v rec/s, want the last near 133:\n%s", rates, s)
	}
}

func TestSubjectFor(t *testing.T) {
	for _, tc := range []struct{ pattern, want string }{
		{"plant.demo.pump.trip", "plant.demo.pump.trip"},
		{"plant.*.trip", "plant.p3.trip"},
		{"plant.pump.>", "plant.pump.p3"},
	} {
		if got := subjectFor(tc.pattern)("p3"); got != tc.want {
			t.Errorf("%s: %s, want %s", tc.pattern, got, tc.want)
		}
	}
}

// TestDemoPredict runs the demo and checks predict calls against the
// daemon's Predictor, which decodes with package record (the one decoder of
// the wire format): the named form "x" and the array form "v" (in the
// document's feature order) give the answer of sink.Predict on the
// published document, and bodies the decoder rejects answer 400 with its
// reason.
func TestDemoPredict(t *testing.T) {
	if testing.Short() {
		t.Skip("demo: a few seconds")
	}
	demo := startLiveDemo(t)
	url := demo.base + "/v1/models/pump-trip"
	demo.waitFor(t, func() error { return checkDemoPredict(t, url) })
	for _, tc := range []struct{ body, want string }{
		{`{"v":[1,2]}`, `record: dimension: \"v\" has 2 values`},
		{`{"x":{"vib_x_mms":"hot"}}`, "record: type"},
		{`{"x":{},"v":[]}`, "record: malformed"},
		{`{"x":`, "record: malformed"},
	} {
		code, body, err := post(url+"/predict", []byte(tc.body))
		if err != nil {
			t.Fatal(err)
		}
		if code != http.StatusBadRequest || !strings.Contains(string(body), tc.want) {
			t.Errorf("%s: %d %s, want 400 with %s", tc.body, code, body, tc.want)
		}
	}
	demo.stop(t)
}

// checkDemoPredict fetches the published document at url, predicts one
// record in the named and the array form and compares both with
// sink.Predict on the document, failing t on a difference. An error means
// "not yet": no version, or a new version between the calls.
func checkDemoPredict(t *testing.T, url string) error {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		return err
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("GET %s: %s: %s", url, resp.Status, b)
	}
	var doc sink.ModelDoc
	if err := json.Unmarshal(b, &doc); err != nil {
		return err
	}
	x := make(map[string]float64, len(doc.Features))
	v := make([]float64, len(doc.Features))
	for j, name := range doc.Features {
		sc := doc.Scale[name]
		v[j] = sc.Mean + 0.5*sc.Std*float64(j%3-1)
		x[name] = v[j]
	}
	want, err := sink.Predict(&doc, x)
	if err != nil {
		return err
	}
	for _, form := range []any{map[string]any{"x": x}, map[string]any{"v": v}} {
		body, _ := json.Marshal(form)
		code, out, err := post(url+"/predict", body)
		if err != nil || code != http.StatusOK {
			return fmt.Errorf("predict %s: %d %s %v", body, code, out, err)
		}
		var got sink.Prediction
		if err := json.Unmarshal(out, &got); err != nil {
			return err
		}
		if got.Version != doc.Version {
			return fmt.Errorf("versions %d and %d: retry", got.Version, doc.Version)
		}
		if math.Abs(got.Eta-want.Eta) > 1e-9*math.Max(1, math.Abs(want.Eta)) ||
			len(got.Contributions) != len(want.Contributions) ||
			got.Probability == nil || math.Abs(*got.Probability-*want.Probability) > 1e-9 {
			t.Fatalf("predict %s: %+v, sink.Predict says %+v", body, got, want)
		}
	}
	return nil
}

// post sends body to url and returns the status and the answer.
func post(url string, body []byte) (int, []byte, error) {
	resp, err := http.Post(url, "application/json", bytes.NewReader(body))
	if err != nil {
		return 0, nil, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	return resp.StatusCode, b, err
}

// TestDemoPMMLPredict runs the demo, fetches pump-trip as PMML with
// `lariat pull --pmml`, evaluates the document by the PMML 4.4 Regression
// rules (from memory of the specification: y = intercept + Σ
// coefficient·x^exponent, p = 1/(1 + e^−y) for normalizationMethod
// "logit"; sink/pmml_eval_test.go has the full evaluator and name check)
// and compares with the daemon's POST /v1/models/pump-trip/predict answer
// for the same version, to 1e-9.
func TestDemoPMMLPredict(t *testing.T) {
	if testing.Short() {
		t.Skip("demo: a few seconds")
	}
	demo := startLiveDemo(t)
	checked := 0
	demo.waitFor(t, func() error { // three agreeing versions in a row
		if err := checkPMMLPredict(t, demo.base, "pump-trip"); err != nil {
			return err
		}
		if checked++; checked < 3 {
			return fmt.Errorf("%d of 3 versions checked", checked)
		}
		return nil
	})
	demo.stop(t)
}

// pmmlDoc is what TestDemoPMMLPredict reads of a PMML 4.4 document.
type pmmlDoc struct {
	XMLName xml.Name `xml:"http://www.dmg.org/PMML-4_4 PMML"`
	Header  struct {
		ModelVersion string `xml:"modelVersion,attr"`
	} `xml:"Header"`
	Fields []struct {
		Name string `xml:"name,attr"`
	} `xml:"DataDictionary>DataField"`
	Model struct {
		Normalization string `xml:"normalizationMethod,attr"`
		Mining        []struct {
			Name  string `xml:"name,attr"`
			Usage string `xml:"usageType,attr"`
		} `xml:"MiningSchema>MiningField"`
		Tables []struct {
			Intercept  float64 `xml:"intercept,attr"`
			Predictors []struct {
				Name        string  `xml:"name,attr"`
				Exponent    float64 `xml:"exponent,attr"`
				Coefficient float64 `xml:"coefficient,attr"`
			} `xml:"NumericPredictor"`
		} `xml:"RegressionTable"`
	} `xml:"RegressionModel"`
}

// checkPMMLPredict fetches model's PMML with the pull command, evaluates it
// on one record and compares with the daemon's prediction, failing t on a
// difference. An error means "not yet": no version, or a new version
// between the calls.
func checkPMMLPredict(t *testing.T, base, model string) error {
	t.Helper()
	out, _, err := run(t, "pull", model, "--from", base, "--pmml")
	if err != nil {
		return err
	}
	var p pmmlDoc
	if err := xml.Unmarshal([]byte(out), &p); err != nil {
		t.Fatalf("pull --pmml: %v\n%s", err, out)
	}
	target := ""
	for _, f := range p.Model.Mining {
		if f.Usage == "target" {
			target = f.Name
		}
	}
	x := map[string]float64{}
	for i, f := range p.Fields {
		if f.Name != target {
			x[f.Name] = 1 + 0.25*float64(i%7)
		}
	}
	tb := p.Model.Tables[0]
	y := tb.Intercept
	for _, np := range tb.Predictors {
		y += np.Coefficient * math.Pow(x[np.Name], np.Exponent)
	}
	if p.Model.Normalization != "logit" || len(p.Model.Tables) != 2 {
		t.Fatalf("pump-trip PMML: normalization %q, %d tables", p.Model.Normalization, len(p.Model.Tables))
	}
	prob := 1 / (1 + math.Exp(-y))
	body, _ := json.Marshal(map[string]any{"x": x})
	code, ans, err := post(base+"/v1/models/"+model+"/predict", body)
	if err != nil || code != http.StatusOK {
		return fmt.Errorf("predict: %d %s %v", code, ans, err)
	}
	var got sink.Prediction
	if err := json.Unmarshal(ans, &got); err != nil {
		return err
	}
	if v := strconv.FormatUint(got.Version, 10); v != p.Header.ModelVersion {
		return fmt.Errorf("versions %s and %s: retry", v, p.Header.ModelVersion)
	}
	if math.Abs(got.Eta-y) > 1e-9*math.Max(1, math.Abs(y)) || got.Probability == nil || math.Abs(*got.Probability-prob) > 1e-9 {
		t.Fatalf("version %s: PMML says η %.17g, p %.17g; the daemon %+v", p.Header.ModelVersion, y, prob, got)
	}
	return nil
}

// liveDemo is a demo running in the background of a test (400 records/s,
// no fault, free ports, a temporary data directory).
type liveDemo struct {
	base   string // http://host:port of its HTTP API
	cancel context.CancelFunc
	done   chan error
}

// startLiveDemo starts the demo; stop (or the test's end) stops it.
func startLiveDemo(t *testing.T) *liveDemo {
	t.Helper()
	addr := fmt.Sprintf("127.0.0.1:%d", freePort(t))
	ctx, cancel := context.WithCancel(context.Background())
	d := &liveDemo{base: "http://" + addr, cancel: cancel, done: make(chan error, 1)}
	t.Cleanup(cancel)
	go func() { // joined by stop
		d.done <- runDemo(ctx, demoOptions{Duration: time.Minute, Rate: 400, FaultAfter: -1,
			Data: t.TempDir(), NATSListen: "127.0.0.1:-1", HTTPListen: addr})
	}()
	return d
}

// waitFor calls f every 50 ms until it returns nil; it fails the test after
// 30 s with f's last error, or at once if the demo stops.
func (d *liveDemo) waitFor(t *testing.T, f func() error) {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for {
		err := f()
		if err == nil {
			return
		}
		if time.Now().After(deadline) {
			t.Fatal(err)
		}
		select {
		case err := <-d.done:
			t.Fatalf("demo stopped early: %v", err)
		case <-time.After(50 * time.Millisecond):
		}
	}
}

// stop stops the demo and checks it ended cleanly.
func (d *liveDemo) stop(t *testing.T) {
	t.Helper()
	d.cancel()
	if err := <-d.done; err != nil {
		t.Errorf("demo: %v", err)
	}
}
