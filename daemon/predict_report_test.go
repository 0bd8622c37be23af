package daemon

import (
	"bytes"
	"encoding/json"
	"io"
	"net/http"
	"slices"
	"strings"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestPredictReport checks, over real HTTP against a daemon trained through
// its embedded NATS server, that POST /v1/models/{name}/predict names the
// sent features the model does not know and the model's features it had to
// impute, refuses with 400 a record that has a value for none of the model's
// features, and that no error answer echoes more than a short prefix of what
// was sent (sink.MaxEcho bytes of one value).
func TestPredictReport(t *testing.T) {
	tr := sparseTruth(4) // x00..x03
	m := testModel("report", "test.report", config.LossSquared)
	td := startDaemon(t, testConfig(t, m), withoutIdle())
	nc := connect(t, td.NATSURL())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	for _, rec := range tr.records(300, false, 5) {
		nc.Publish(m.Subject, rec)
	}
	nc.Flush()
	natstest.WaitFor(t, 20*time.Second, func() error {
		_, _, err := getDoc(td.Daemon, m.Name)
		return err
	})

	long := strings.Repeat("n", 10_000)
	q := strings.Repeat("q", 255) // with one more byte, the longest channel name a decoder learns
	url := "http://" + td.HTTPAddr() + "/v1/models/"
	for _, tc := range []struct {
		name, model, body string
		status            int
		unknown, missing  []string // for 200
		want              string   // substring of the error, for 4xx
	}{
		{name: "all known", model: "report", body: `{"x":{"x00":1,"x01":2,"x02":3,"x03":4}}`, status: 200,
			unknown: []string{}, missing: []string{}},
		{name: "one unknown, one missing", model: "report", body: `{"x":{"x00":1,"x01":2,"x02":3,"extra":4}}`, status: 200,
			unknown: []string{"extra"}, missing: []string{"x03"}},
		{name: "null is missing", model: "report", body: `{"x":{"x00":1,"x01":null,"zz":1,"aa":2}}`, status: 200,
			unknown: []string{"zz", "aa"}, missing: []string{"x01", "x02", "x03"}},
		{name: "array form with a null", model: "report", body: `{"v":[1,2,null,4]}`, status: 200,
			unknown: []string{}, missing: []string{"x02"}},
		{name: "only unknown features", model: "report", body: `{"x":{"foo":1,"bar":2}}`, status: 400,
			want: `value for none of the 4 features of model report ("x00", "x01", "x02", "x03"); unknown: "foo", "bar"`},
		{name: "no features", model: "report", body: `{"x":{}}`, status: 400, want: "unknown: none"},
		{name: "known names, all null", model: "report", body: `{"x":{"x00":null}}`, status: 400, want: "value for none"},
		{name: "many long unknown names", model: "report", body: `{"x":{"` + q + `1":1,"` + q + `2":1,"` + q + `3":1,"` + q + `4":1}}`, status: 400,
			want: "and 1 more"},
		{name: "name too long", model: "report", body: `{"x":{"x00":1,"` + long + `":1}}`, status: 400, want: "name"},
		{name: "unknown model, 10,000 characters", model: long, body: `{"x":{"x00":1}}`, status: 404, want: "(10000 bytes)"},
		{name: "bad JSON with a long string", model: "report", body: `{"x":{"x00":"` + long, status: 400},
		{name: "long number", model: "report", body: `{"x":{"x00":1` + strings.Repeat("0", 5000) + `}}`, status: 400},
	} {
		t.Run(tc.name, func(t *testing.T) {
			resp, err := http.Post(url+tc.model+"/predict", "application/json", bytes.NewReader([]byte(tc.body)))
			if err != nil {
				t.Fatal(err)
			}
			b, _ := io.ReadAll(resp.Body)
			resp.Body.Close()
			if resp.StatusCode != tc.status {
				t.Fatalf("status %d, want %d: %s", resp.StatusCode, tc.status, b)
			}
			if tc.status == 200 {
				var p sink.Prediction
				if err := json.Unmarshal(b, &p); err != nil {
					t.Fatal(err)
				}
				if !slices.Equal(p.Unknown, tc.unknown) || !slices.Equal(p.Missing, tc.missing) {
					t.Errorf("unknown %q missing %q, want %q and %q", p.Unknown, p.Missing, tc.unknown, tc.missing)
				}
				if !bytes.Contains(b, []byte(`"unknown":[`)) || !bytes.Contains(b, []byte(`"missing":[`)) {
					t.Errorf("the answer lacks the unknown or missing list: %s", b)
				}
				return
			}
			var e struct{ Error string }
			if err := json.Unmarshal(b, &e); err != nil || e.Error == "" {
				t.Fatalf("error body %s: %v", b, err)
			}
			if !strings.Contains(e.Error, tc.want) {
				t.Errorf("error %q lacks %q", e.Error, tc.want)
			}
			checkEcho(t, e.Error, tc.model+tc.body)
		})
	}
}

// checkEcho fails if msg repeats more than a short prefix of one value of
// sent: no run of a repeated character longer than sink.MaxEcho, and no
// more than 1 KiB in all.
func checkEcho(t *testing.T, msg, sent string) {
	t.Helper()
	if len(msg) > 1100 {
		t.Errorf("error of %d bytes", len(msg))
	}
	for _, c := range "nq0" {
		if run := strings.Repeat(string(c), sink.MaxEcho+1); strings.Contains(sent, run) && strings.Contains(msg, run) {
			t.Errorf("error echoes more than %d bytes of the request: %.200s…", sink.MaxEcho, msg)
		}
	}
}
