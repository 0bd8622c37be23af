package sink

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

const testToken = "s3cret-admin-token"

// fakeThresholds records threshold changes.
type fakeThresholds struct {
	mu    sync.Mutex
	calls []string
}

var _ ThresholdSetter = (*fakeThresholds)(nil)

// SetThresholdTarget records the call; model "frozen" refuses.
func (f *fakeThresholds) SetThresholdTarget(model, mode string, target float64) error {
	if model == "frozen" {
		return errors.New("threshold of frozen is fixed by configuration")
	}
	f.mu.Lock()
	defer f.mu.Unlock()
	f.calls = append(f.calls, fmt.Sprintf("%s %s %v", model, mode, target))
	return nil
}

// fakePredictor scores predict calls with Predict on the store's published
// documents. It does not decode records: decoding the wire format is the
// Predictor's job (the daemon's uses package record, and its decoding over
// HTTP is tested in package daemon and in the command's demo test), so each
// body these tests send maps to the feature values it stands for.
type fakePredictor struct {
	store  *Store
	values map[string]map[string]float64 // request body -> feature values by name
}

var _ Predictor = fakePredictor{}

// Predict implements Predictor; a body not in the table is a bad record.
func (p fakePredictor) Predict(model string, body []byte) (*Prediction, error) {
	doc, known := p.store.Model(model)
	switch {
	case !known:
		return nil, fmt.Errorf("%w %q", ErrUnknownModel, model)
	case doc == nil:
		return nil, fmt.Errorf("%w: %q has not published a version yet", ErrNotReady, model)
	}
	x, ok := p.values[string(body)]
	if !ok {
		return nil, fmt.Errorf("%w: the test predictor does not know the body %s", ErrBadRecord, body)
	}
	return Predict(doc, x)
}

// testPredictor is the fakePredictor of the predict cases of
// TestHTTPEndpoints.
func testPredictor(s *Store) fakePredictor {
	return fakePredictor{store: s, values: map[string]map[string]float64{
		`{"x":{"a":11,"c":-2,"unknown":5}}`:                         {"a": 11, "c": -2, "unknown": 5},
		`{"x":{"a":100,"b":null},"y":1,"t":"2026-03-04T05:06:07Z"}`: {"a": 100},
		`{"x":{"a":1e308,"c":-1e308}}`:                              {"a": 1e308, "c": -1e308},
	}}
}

// testAPI builds a store with a squared model "lin" (version 3), a logistic
// model "clf" (version 5) with a ROC table and alerts, and a registered
// model "pending" without a version.
func testAPI(t *testing.T) (*Store, *fakeThresholds, *prometheus.Registry) {
	t.Helper()
	s := NewStore()
	s.Register("pending")
	for _, d := range []*ModelDoc{testDoc(t, "lin", "squared", 3), testDoc(t, "clf", "logistic", 5), testDoc(t, "frozen", "logistic", 1)} {
		if err := s.SetModel(d); err != nil {
			t.Fatal(err)
		}
	}
	s.SetROC("clf", nil)
	s.AddAlert(Alert{Model: "clf", Kind: KindData, Severity: SeverityWarning, Statistic: 0.4, Threshold: 0.25,
		Features: []string{"a"}, Seq: 11, Time: time.Date(2026, 3, 4, 5, 0, 0, 0, time.UTC), Message: "PSI of a is 0.4 > 0.25 <b>"})
	s.AddAlert(Alert{Model: "lin", Kind: KindPerformance, Severity: SeverityCritical, Statistic: 2, Threshold: 1,
		Seq: 12, Time: time.Date(2026, 3, 4, 6, 0, 0, 0, time.UTC), Message: "loss rose"})
	reg := prometheus.NewPedanticRegistry()
	m, err := NewMetrics(reg)
	if err != nil {
		t.Fatal(err)
	}
	m.Model("lin").Accepted.Add(5)
	return s, &fakeThresholds{}, reg
}

func TestHTTPEndpoints(t *testing.T) {
	store, setter, reg := testAPI(t)
	h := NewHandler(HandlerOptions{Store: store, AdminToken: testToken, Predictor: testPredictor(store), Thresholds: setter, Gatherer: reg, MaxBodyBytes: 256})
	bearer := map[string]string{"Authorization": "Bearer " + testToken}
	lin, _ := store.Model("lin")
	linEta, _ := lin.Eta(map[string]float64{"a": 11, "c": -2})

	for _, tc := range []struct {
		name    string
		method  string
		path    string
		header  map[string]string
		body    string
		chunked bool // hide the body length (exercises http.MaxBytesReader)
		status  int
		want    []string          // substrings of the body
		hdr     map[string]string // expected response headers
		check   func(t *testing.T, body []byte)
	}{
		{name: "model list", method: "GET", path: "/v1/models", status: 200,
			want: []string{`"name":"clf"`, `"name":"lin"`, `"loss":"squared"`, `"nonzero":2`, `"lambda":0.05`},
			check: func(t *testing.T, b []byte) {
				var r struct{ Models []modelSummary }
				if err := json.Unmarshal(b, &r); err != nil || len(r.Models) != 3 {
					t.Errorf("models = %+v, %v (pending must not be listed)", r.Models, err)
				}
			}},
		{name: "model", method: "GET", path: "/v1/models/lin", status: 200, hdr: map[string]string{"ETag": `"3"`, "Content-Type": "application/json"},
			check: func(t *testing.T, b []byte) {
				var d ModelDoc
				if err := json.Unmarshal(b, &d); err != nil || d.Version != 3 || d.Model != "lin" {
					t.Errorf("doc %+v, %v", d, err)
				}
			}},
		{name: "head model", method: "HEAD", path: "/v1/models/lin", status: 200, hdr: map[string]string{"ETag": `"3"`}},
		{name: "if-none-match current", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `"3"`}, status: 304, hdr: map[string]string{"ETag": `"3"`}},
		{name: "if-none-match weak", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `W/"3"`}, status: 304},
		{name: "if-none-match list", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `"1", "2" ,"3"`}, status: 304},
		{name: "if-none-match star", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `*`}, status: 304},
		{name: "if-none-match stale", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `"2"`}, status: 200, want: []string{`"version":3`}},
		{name: "if-none-match unquoted", method: "GET", path: "/v1/models/lin", header: map[string]string{"If-None-Match": `3`}, status: 200},
		{name: "unknown model", method: "GET", path: "/v1/models/nope", status: 404, want: []string{`{"error":"unknown model \"nope\""}`}},
		{name: "no version yet", method: "GET", path: "/v1/models/pending", status: 503, want: []string{"has not published"}, hdr: map[string]string{"Retry-After": "5"}},
		{name: "pmml", method: "GET", path: "/v1/models/clf/pmml", status: 200, hdr: map[string]string{"ETag": `"5"`, "Content-Type": "application/xml; charset=utf-8"},
			want: []string{`functionName="classification"`, `normalizationMethod="logit"`}},
		{name: "pmml not modified", method: "GET", path: "/v1/models/clf/pmml", header: map[string]string{"If-None-Match": `"5"`}, status: 304},
		{name: "pmml unknown", method: "GET", path: "/v1/models/nope/pmml", status: 404},
		{name: "ladder", method: "GET", path: "/v1/models/lin/ladder", status: 200,
			want: []string{`"model":"lin"`, `"lambda_index":3`, `"index":4`, `"r2":`,
				`"grid":{"anchor":"df","top":12,"bottom":0.01,"df":[0.5,2.5],"rank":3,"extended":3,"max_extended":18}`}},
		{name: "ladder lasso grid", method: "GET", path: "/v1/models/clf/ladder", status: 200,
			want: []string{`"grid":{"anchor":"lambda_max","top":0.4,"bottom":0.0004,"extended":0,"max_extended":22}`}},
		{name: "threshold", method: "GET", path: "/v1/models/clf/threshold", status: 200,
			want: []string{`"threshold":{"value":0.8,"mode":"fpr","target":0.02}`, `"roc":[]`}},
		{name: "threshold of squared model", method: "GET", path: "/v1/models/lin/threshold", status: 404, want: []string{"no threshold"}},
		{name: "put threshold without token", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.02}`,
			status: 401, hdr: map[string]string{"WWW-Authenticate": `Bearer realm="lariat"`}},
		{name: "put threshold wrong token", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.02}`,
			header: map[string]string{"Authorization": "Bearer " + testToken + "x"}, status: 401, want: []string{"invalid bearer token"}},
		{name: "put threshold basic auth", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.02}`,
			header: map[string]string{"Authorization": "Basic " + testToken}, status: 401},
		{name: "put threshold", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.02}`,
			header: bearer, status: 202, want: []string{`"mode":"fpr"`, `"target":0.02`}},
		{name: "put fixed threshold by value", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fixed","value":0.7}`,
			header: bearer, status: 202},
		{name: "put threshold bad mode", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"auc","target":0.02}`,
			header: bearer, status: 400, want: []string{"allowed: fixed, fpr, precision"}},
		{name: "put threshold out of range", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"precision","target":1.5}`,
			header: bearer, status: 400},
		{name: "put threshold target 1", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"precision","target":1}`,
			header: bearer, status: 400, want: []string{"(0, 1)"}},
		{name: "put threshold target 0", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0}`,
			header: bearer, status: 400, want: []string{"(0, 1)"}},
		{name: "put threshold unknown field", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.1,"x":1}`,
			header: bearer, status: 400},
		{name: "put threshold trailing data", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.1} {}`,
			header: bearer, status: 400, want: []string{"exactly one JSON object"}},
		{name: "put threshold no target", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr"}`,
			header: bearer, status: 400, want: []string{"target is required"}},
		{name: "put threshold setter refuses", method: "PUT", path: "/v1/models/frozen/threshold", body: `{"mode":"fpr","target":0.1}`,
			header: bearer, status: 400, want: []string{"fixed by configuration"}},
		{name: "put threshold unknown model", method: "PUT", path: "/v1/models/nope/threshold", body: `{"mode":"fpr","target":0.1}`,
			header: bearer, status: 404},
		{name: "put threshold squared model", method: "PUT", path: "/v1/models/lin/threshold", body: `{"mode":"fpr","target":0.1}`,
			header: bearer, status: 404},
		{name: "put threshold too large", method: "PUT", path: "/v1/models/clf/threshold", body: `{"mode":"fpr","target":0.1}` + strings.Repeat(" ", 300),
			header: bearer, status: 413},
		{name: "predict squared", method: "POST", path: "/v1/models/lin/predict", body: `{"x":{"a":11,"c":-2,"unknown":5}}`, status: 200,
			check: func(t *testing.T, b []byte) {
				var p Prediction
				if err := json.Unmarshal(b, &p); err != nil {
					t.Fatal(err)
				}
				if p.Eta != linEta || p.Probability != nil || len(p.Contributions) != 2 || p.Contributions["a"] != 0.25*11 {
					t.Errorf("prediction %+v, want eta %v", p, linEta)
				}
				if !slices.Equal(p.Unknown, []string{"unknown"}) || !slices.Equal(p.Missing, []string{"b"}) {
					t.Errorf("unknown %q, missing %q; want [unknown] and [b]", p.Unknown, p.Missing)
				}
			}},
		{name: "predict logistic", method: "POST", path: "/v1/models/clf/predict", body: `{"x":{"a":100,"b":null},"y":1,"t":"2026-03-04T05:06:07Z"}`, status: 200,
			check: func(t *testing.T, b []byte) {
				var p Prediction
				if err := json.Unmarshal(b, &p); err != nil {
					t.Fatal(err)
				}
				if p.Probability == nil || p.Positive == nil || *p.Threshold != 0.8 || *p.Positive != (*p.Probability >= 0.8) {
					t.Errorf("prediction %+v", p)
				}
				// σ(η) = 1/(1 + e^−η), the logistic link (definition).
				if want := 1 / (1 + math.Exp(-p.Eta)); math.Abs(*p.Probability-want) > 1e-15 {
					t.Errorf("probability %v, σ(η) = %v", *p.Probability, want)
				}
			}},
		{name: "predict refused", method: "POST", path: "/v1/models/lin/predict", body: `{"x":{"a":"hot"}}`, status: 400,
			want: []string{`sink: bad record: the test predictor does not know the body {\"x\":{\"a\":\"hot\"}}`}},
		{name: "predict overflow", method: "POST", path: "/v1/models/lin/predict", body: `{"x":{"a":1e308,"c":-1e308}}`, status: 400, want: []string{"overflows"}},
		{name: "predict too large", method: "POST", path: "/v1/models/lin/predict", body: `{"x":{"a":1}}` + strings.Repeat(" ", 300), status: 413},
		{name: "predict too large chunked", method: "POST", path: "/v1/models/lin/predict", body: `{"x":{"a":1}}` + strings.Repeat(" ", 300), chunked: true, status: 413},
		{name: "predict unknown model", method: "POST", path: "/v1/models/nope/predict", body: `{}`, status: 404},
		{name: "predict no version yet", method: "POST", path: "/v1/models/pending/predict", body: `{}`, status: 503},
		{name: "predict with GET", method: "GET", path: "/v1/models/lin/predict", status: 405, hdr: map[string]string{"Allow": "POST"}},
		{name: "delete model", method: "DELETE", path: "/v1/models/lin", status: 405, hdr: map[string]string{"Allow": "GET, HEAD"}, want: []string{`"error":`}},
		{name: "alerts", method: "GET", path: "/v1/alerts", status: 200, want: []string{`"seq":11`, `"seq":12`}},
		{name: "alerts of one model", method: "GET", path: "/v1/alerts?model=lin", status: 200,
			check: func(t *testing.T, b []byte) {
				var r struct{ Alerts []Alert }
				if err := json.Unmarshal(b, &r); err != nil || len(r.Alerts) != 1 || r.Alerts[0].Seq != 12 {
					t.Errorf("alerts %+v, %v", r.Alerts, err)
				}
			}},
		{name: "alerts of a quiet model", method: "GET", path: "/v1/alerts?model=pending", status: 200, want: []string{`{"alerts":[]}`}},
		{name: "alerts of unknown model", method: "GET", path: "/v1/alerts?model=nope", status: 404},
		{name: "healthz", method: "GET", path: "/healthz", status: 200, want: []string{`"status":"ok"`}},
		{name: "readyz", method: "GET", path: "/readyz", status: 200, want: []string{`"status":"ready"`}},
		{name: "metrics", method: "GET", path: "/metrics", status: 200, want: []string{`lariat_records_accepted_total{model="lin"} 5`}},
		{name: "status page", method: "GET", path: "/", status: 200, hdr: map[string]string{"Content-Type": "text/html; charset=utf-8"}},
		{name: "unknown path", method: "GET", path: "/v2/models", status: 404, want: []string{`"error":"no such endpoint: \"/v2/models\""`}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var body io.Reader
			if tc.body != "" {
				body = strings.NewReader(tc.body)
			}
			req := httptest.NewRequest(tc.method, tc.path, body)
			if tc.chunked {
				req.ContentLength = -1
			}
			for k, v := range tc.header {
				req.Header.Set(k, v)
			}
			rec := httptest.NewRecorder()
			h.ServeHTTP(rec, req)
			b := rec.Body.Bytes()
			if rec.Code != tc.status {
				t.Fatalf("status %d, want %d; body %s", rec.Code, tc.status, b)
			}
			for k, v := range tc.hdr {
				if got := rec.Header().Get(k); got != v {
					t.Errorf("header %s = %q, want %q", k, got, v)
				}
			}
			for _, w := range tc.want {
				if !strings.Contains(string(b), w) {
					t.Errorf("body lacks %s:\n%s", w, b)
				}
			}
			if tc.status >= 400 {
				var e struct{ Error string }
				if err := json.Unmarshal(b, &e); err != nil || e.Error == "" {
					t.Errorf("error body is not {\"error\": ...}: %s", b)
				}
			}
			if tc.status == 304 && len(b) != 0 {
				t.Errorf("304 with a body: %s", b)
			}
			if tc.check != nil {
				tc.check(t, b)
			}
		})
	}
	if want := "clf fpr 0.02|clf fixed 0.7"; strings.Join(setter.calls, "|") != want {
		t.Errorf("threshold calls = %q, want %q", setter.calls, want)
	}
}

func TestHTTPThresholdDisabled(t *testing.T) {
	store, setter, _ := testAPI(t)
	for _, tc := range []struct {
		name   string
		o      HandlerOptions
		status int
		want   string
	}{
		{"no admin token", HandlerOptions{Store: store, Thresholds: setter}, 403, "no admin token is configured"},
		{"no setter", HandlerOptions{Store: store, AdminToken: testToken}, 501, "not supported"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			req := httptest.NewRequest("PUT", "/v1/models/clf/threshold", strings.NewReader(`{"mode":"fpr","target":0.1}`))
			req.Header.Set("Authorization", "Bearer "+testToken)
			rec := httptest.NewRecorder()
			NewHandler(tc.o).ServeHTTP(rec, req)
			if rec.Code != tc.status || !strings.Contains(rec.Body.String(), tc.want) {
				t.Errorf("status %d body %s, want %d %q", rec.Code, rec.Body, tc.status, tc.want)
			}
		})
	}
	if len(setter.calls) != 0 {
		t.Errorf("setter called: %v", setter.calls)
	}
}

// TestHTTPPredictDisabled checks predict calls without a Predictor: 501
// with a JSON error for a known model, still 404 for an unknown one, and
// the body is not read.
func TestHTTPPredictDisabled(t *testing.T) {
	store, _, _ := testAPI(t)
	h := NewHandler(HandlerOptions{Store: store, MaxBodyBytes: 16})
	for _, tc := range []struct {
		model  string
		status int
		want   string
	}{
		{"lin", 501, `{"error":"predictions are not supported by this server (no Predictor)"}`},
		{"pending", 501, "no Predictor"},
		{"nope", 404, `unknown model \"nope\"`},
	} {
		t.Run(tc.model, func(t *testing.T) {
			req := httptest.NewRequest("POST", "/v1/models/"+tc.model+"/predict", strings.NewReader(`{"x":{"a":1}}`+strings.Repeat(" ", 100)))
			rec := httptest.NewRecorder()
			h.ServeHTTP(rec, req)
			if rec.Code != tc.status || !strings.Contains(rec.Body.String(), tc.want) {
				t.Errorf("status %d body %s, want %d %s", rec.Code, rec.Body, tc.status, tc.want)
			}
		})
	}
}

// TestHTTPReadiness serves /readyz over a real listener: 503 with the reason
// until the daemon is ready, then 200.
func TestHTTPReadiness(t *testing.T) {
	var mu sync.Mutex
	reason := errors.New("waiting for NATS")
	srv := httptest.NewServer(NewHandler(HandlerOptions{Store: NewStore(), Ready: func() error {
		mu.Lock()
		defer mu.Unlock()
		return reason
	}}))
	defer srv.Close()
	get := func() (int, string) {
		resp, err := http.Get(srv.URL + "/readyz")
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	if code, body := get(); code != 503 || !strings.Contains(body, "waiting for NATS") {
		t.Errorf("before ready: %d %s", code, body)
	}
	mu.Lock()
	reason = nil
	mu.Unlock()
	if code, body := get(); code != 200 {
		t.Errorf("after ready: %d %s", code, body)
	}
	if resp, err := http.Get(srv.URL + "/metrics"); err != nil || resp.StatusCode != 404 {
		t.Errorf("/metrics without a Gatherer: %v %v", resp.StatusCode, err)
	} else {
		resp.Body.Close()
	}
}

func TestStatusPage(t *testing.T) {
	store, _, reg := testAPI(t)
	h := NewHandler(HandlerOptions{Store: store, Gatherer: reg, Refresh: 7 * time.Second, Version: "v0.1.0",
		Ready: func() error { return errors.New("replaying") }})
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("GET", "/", nil))
	if rec.Code != 200 {
		t.Fatalf("status %d", rec.Code)
	}
	page := rec.Body.String()
	for _, want := range []string{
		`<meta http-equiv="refresh" content="7">`,
		`<a href="/v1/models/clf">clf</a>`, `<a href="/v1/models/lin">lin</a>`,
		`<dd>0.05 (index 3)</dd>`, // λ*
		`<dd>2 / 3</dd>`,          // nonzero / features
		`<dd>0.7 ± 0.01</dd>`,     // held-out loss of the chosen member
		`AUC 0.75`, `R² 0.3`,      // quality by loss
		`not ready: replaying`, `v0.1.0`, // readiness and version
		`PSI of a is 0.4 &gt; 0.25 &lt;b&gt;`, // alert message, escaped
		`class="critical"`,
		`waiting for a first version: pending`,
		`<dd>warning data 2026-03-04T05:00:00Z</dd>`, // clf's last alert
	} {
		if !strings.Contains(page, want) {
			t.Errorf("status page lacks %s", want)
		}
	}
	if strings.Contains(page, "<script") || strings.Contains(page, "http://") || strings.Contains(page, "https://") {
		t.Error("status page has scripts or external references")
	}
	// Models in name order, each with its own alerts.
	if strings.Index(page, `id="model-clf"`) > strings.Index(page, `id="model-lin"`) ||
		strings.Index(page, "PSI of a") > strings.Index(page, `id="model-lin"`) ||
		strings.Index(page, "loss rose") < strings.Index(page, `id="model-lin"`) {
		t.Error("model sections out of order or alerts under the wrong model")
	}
}

func TestNewServer(t *testing.T) {
	s := NewServer("127.0.0.1:0", http.NotFoundHandler())
	if s.ReadHeaderTimeout <= 0 || s.ReadTimeout <= 0 || s.WriteTimeout <= 0 || s.IdleTimeout <= 0 || s.MaxHeaderBytes <= 0 {
		t.Errorf("server limits not all set: %+v", s)
	}
}

func TestMatchETag(t *testing.T) {
	// RFC 9110 §13.1.2: weak comparison, "*" matches any current representation.
	for _, tc := range []struct {
		list string
		want bool
	}{
		{`"7"`, true}, {`W/"7"`, true}, {`"6", W/"7"`, true}, {`*`, true},
		{`"6"`, false}, {`"77"`, false}, {`7`, false}, {``, false}, {`"7`, false}, {`"a,b", "7"`, true},
	} {
		if got := matchETag(tc.list, `"7"`); got != tc.want {
			t.Errorf("matchETag(%q) = %v, want %v", tc.list, got, tc.want)
		}
	}
}

func BenchmarkHandlerModel(b *testing.B) {
	s := NewStore()
	if err := s.SetModel(wideDoc(b, 64)); err != nil {
		b.Fatal(err)
	}
	h := NewHandler(HandlerOptions{Store: s})
	req := httptest.NewRequest("GET", "/v1/models/wide", nil)
	b.ReportAllocs()
	for b.Loop() {
		h.ServeHTTP(httptest.NewRecorder(), req)
	}
}

// TestETagEpoch: with an epoch, the ETag is "<epoch>-<version>", and an
// ETag from another epoch (a daemon before its restart) never gives a 304,
// even for the same version number.
func TestETagEpoch(t *testing.T) {
	store := NewStore()
	if err := store.SetModel(testDoc(t, "lin", "squared", 3)); err != nil {
		t.Fatal(err)
	}
	get := func(epoch, inm string) *httptest.ResponseRecorder {
		rec := httptest.NewRecorder()
		req := httptest.NewRequest(http.MethodGet, "/v1/models/lin", nil)
		if inm != "" {
			req.Header.Set("If-None-Match", inm)
		}
		NewHandler(HandlerOptions{Store: store, Epoch: epoch}).ServeHTTP(rec, req)
		return rec
	}
	before := get("k1x9", "")
	if tag := before.Header().Get("ETag"); tag != `"k1x9-3"` {
		t.Fatalf("ETag %q, want \"k1x9-3\"", tag)
	}
	if c := get("k1x9", `"k1x9-3"`).Code; c != http.StatusNotModified {
		t.Errorf("same epoch and version: %d, want 304", c)
	}
	if c := get("k2aa", `"k1x9-3"`).Code; c != http.StatusOK {
		t.Errorf("another epoch, same version: %d, want 200", c)
	}
}
