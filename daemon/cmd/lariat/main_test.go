package main

import (
	"bytes"
	"errors"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"lariat/online"
	"lariat/sink"
)

// run executes the lariat command in-process and returns stdout, stderr and
// the error.
func run(t *testing.T, args ...string) (string, string, error) {
	t.Helper()
	var out, errb bytes.Buffer
	root := newRootCmd()
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(args)
	err := root.Execute()
	return out.String(), errb.String(), err
}

func TestCheck(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.yaml")
	os.WriteFile(bad, []byte(`models:
  - name: Bad Name
    subject: plant.x
    loss: poisson
    colour: blue
`), 0o600)
	cases := []struct {
		name    string
		file    string
		ok      bool
		wantOut []string
	}{
		{"example passes", "../../../config/example.yaml", true, []string{"example.yaml: ok"}},
		{"bad file", bad, false, []string{"bad.yaml:2:", "models[0].name", "bad.yaml:4:", "models[0].loss", "colour"}},
		{"missing file", filepath.Join(dir, "nope.yaml"), false, []string{"nope.yaml"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			out, errOut, err := run(t, "check", "-c", tc.file)
			if tc.ok != (err == nil) {
				t.Fatalf("err = %v; stdout %q stderr %q", err, out, errOut)
			}
			if !tc.ok {
				var ee *exitError
				if !errors.As(err, &ee) || ee.code != 1 {
					t.Errorf("err = %v, want exit status 1", err)
				}
			}
			all := out + errOut
			for _, want := range tc.wantOut {
				if !strings.Contains(all, want) {
					t.Errorf("output lacks %q:\n%s", want, all)
				}
			}
		})
	}
}

func TestVersion(t *testing.T) {
	out, _, err := run(t, "version")
	if err != nil || !strings.HasPrefix(out, "lariat ") {
		t.Fatalf("version: %q, %v", out, err)
	}
}

// TestPull serves a model document from a test server and prints it as a
// table and as unchanged JSON.
func TestPull(t *testing.T) {
	srv, _ := serveOneModel(t, "squared", 7, 1.25)

	out, _, err := run(t, "pull", "pump-trip", "--from", srv.URL)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"pump-trip (version 7", "lasso", "0.05", "vib", "temp", "(intercept)"} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "amps ") {
		t.Errorf("zero coefficient printed:\n%s", out)
	}
	raw, _, err := run(t, "pull", "pump-trip", "--from", srv.URL, "--json")
	if err != nil {
		t.Fatal(err)
	}
	resp, err := http.Get(srv.URL + "/v1/models/pump-trip")
	if err != nil {
		t.Fatal(err)
	}
	var want bytes.Buffer
	want.ReadFrom(resp.Body)
	resp.Body.Close()
	if raw != want.String() {
		t.Errorf("--json changed the document:\n%s\nwant\n%s", raw, want.String())
	}
	if _, _, err := run(t, "pull", "nope", "--from", srv.URL); err == nil || !strings.Contains(err.Error(), "404") {
		t.Errorf("unknown model: %v", err)
	}
}

// serveOneModel serves the HTTP API over a store holding one three-feature
// model "pump-trip" of the given loss, version and intercept (closed at the
// end of the test), and that model's document.
func serveOneModel(t *testing.T, loss string, version uint64, intercept float64) (*httptest.Server, *sink.ModelDoc) {
	t.Helper()
	m := &online.Model{
		Loss: loss, Penalty: online.Lasso(), Lambda: 0.05, Index: 3,
		Intercept: intercept, Coef: []float64{2, 0, -0.5}, Standardized: []float64{1, 0, -0.25},
		Mean: []float64{0, 1, 2}, Std: []float64{0.5, 1, 0.5}, Records: 100, Weight: 100, Seen: 120,
	}
	doc, err := sink.NewModelDoc(&sink.DocInput{
		Name: "pump-trip", Version: version, Features: []string{"vib", "amps", "temp"}, Model: m,
		Holdout: 20, Updated: time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC),
	})
	if err != nil {
		t.Fatal(err)
	}
	store := sink.NewStore()
	if err := store.SetModel(doc); err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewServer(sink.NewHandler(sink.HandlerOptions{Store: store}))
	t.Cleanup(srv.Close)
	return srv, doc
}
