package sink

import (
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"unicode/utf8"
)

// TestHTTPErrorsDoNotEcho sends requests whose path, method or body values
// are 10,000 bytes long to the API over real HTTP (a loopback server) and
// checks that every error answer quotes at most MaxEcho bytes of each value,
// says how long it was, and stays under 1 KiB in all.
func TestHTTPErrorsDoNotEcho(t *testing.T) {
	store, setter, reg := testAPI(t)
	srv := httptest.NewServer(NewHandler(HandlerOptions{Store: store, AdminToken: testToken, Predictor: testPredictor(store), Thresholds: setter, Gatherer: reg}))
	defer srv.Close()
	long := strings.Repeat("n", 10_000)
	for _, tc := range []struct {
		name, method, path, body string
		status                   int
		want                     string
	}{
		{"model", "GET", "/v1/models/" + long, "", 404, `unknown model "` + long[:MaxEcho] + `"… (10000 bytes)`},
		{"pmml", "GET", "/v1/models/" + long + "/pmml", "", 404, "(10000 bytes)"},
		{"ladder", "GET", "/v1/models/" + long + "/ladder", "", 404, "(10000 bytes)"},
		{"threshold", "GET", "/v1/models/" + long + "/threshold", "", 404, "(10000 bytes)"},
		{"threshold change", "PUT", "/v1/models/" + long + "/threshold", `{"mode":"fpr","target":0.1}`, 404, "(10000 bytes)"},
		{"predict", "POST", "/v1/models/" + long + "/predict", `{"x":{"a":1}}`, 404, "(10000 bytes)"},
		{"alerts", "GET", "/v1/alerts?model=" + long, "", 404, "(10000 bytes)"},
		{"endpoint", "GET", "/" + long, "", 404, `no such endpoint: "/` + long[:MaxEcho-1] + `"… (10001 bytes)`},
		{"method", "N" + long[1:], "/v1/models", "", 405, "(10000 bytes) not allowed (allowed: GET, HEAD)"},
		{"threshold mode", "PUT", "/v1/models/clf/threshold", `{"mode":"` + long + `","target":0.1}`, 400, "(10000 bytes) (allowed: fixed, fpr, precision)"},
		{"threshold field", "PUT", "/v1/models/clf/threshold", `{"` + long + `":1}`, 400, `unknown field "nnn`},
		{"threshold bad JSON", "PUT", "/v1/models/clf/threshold", `{"mode":` + long + `}`, 400, "invalid character 'n'"},
		{"threshold of a squared model", "PUT", "/v1/models/lin/threshold", `{"mode":"fpr","target":0.1}`, 404, `model "lin" uses the squared loss`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			req, err := http.NewRequest(tc.method, srv.URL+tc.path, strings.NewReader(tc.body))
			if err != nil {
				t.Fatal(err)
			}
			req.Header.Set("Authorization", "Bearer "+testToken)
			resp, err := srv.Client().Do(req)
			if err != nil {
				t.Fatal(err)
			}
			b, _ := io.ReadAll(resp.Body)
			resp.Body.Close()
			if resp.StatusCode != tc.status {
				t.Fatalf("status %d, want %d: %.300s", resp.StatusCode, tc.status, b)
			}
			var e struct{ Error string }
			if err := json.Unmarshal(b, &e); err != nil || e.Error == "" {
				t.Fatalf("error body %.300s: %v", b, err)
			}
			if !strings.Contains(e.Error, tc.want) {
				t.Errorf("error %q lacks %q", e.Error, tc.want)
			}
			if strings.Contains(e.Error, strings.Repeat("n", MaxEcho+1)) || len(b) > 1024 {
				t.Errorf("error of %d bytes echoes the request: %.300s", len(b), b)
			}
		})
	}
}

// TestQuoteInput checks the quoting of request values in error messages.
func TestQuoteInput(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"", `""`},
		{"pump", `"pump"`},
		{`a"b` + "\n", `"a\"b\n"`},
		{strings.Repeat("x", MaxEcho), `"` + strings.Repeat("x", MaxEcho) + `"`},
		{strings.Repeat("x", MaxEcho+1), `"` + strings.Repeat("x", MaxEcho) + `"… (65 bytes)`},
		// A cut never splits a UTF-8 sequence: 63 bytes of x, then "é" (2 bytes).
		{strings.Repeat("x", MaxEcho-1) + "éé", `"` + strings.Repeat("x", MaxEcho-1) + `"… (67 bytes)`},
		{"\xff\xfe", `"\xff\xfe"`},
	} {
		got := QuoteInput(tc.in)
		if got != tc.want {
			t.Errorf("QuoteInput(%.80q) = %s, want %s", tc.in, got, tc.want)
		}
		if !utf8.ValidString(got) {
			t.Errorf("QuoteInput(%.80q) is not valid UTF-8", tc.in)
		}
	}
}
