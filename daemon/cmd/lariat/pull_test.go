package main

import (
	"os"
	"strings"
	"testing"
	"time"

	"lariat/online"
	"lariat/sink"
)

// Example_writeModel prints a model document the way `lariat pull` does.
func Example_writeModel() {
	m := &online.Model{
		Loss: "squared", Penalty: online.Lasso(), Lambda: 0.05, Index: 3,
		Intercept: 20, Coef: []float64{6, 0, 0.5}, Standardized: []float64{3, 0, 1.5},
		Mean: []float64{3, 50, 55}, Std: []float64{0.5, 8, 3}, Records: 4000, Weight: 4000, Seen: 9000,
	}
	doc, _ := sink.NewModelDoc(&sink.DocInput{
		Name: "bearing-temp", Version: 42, Features: []string{"vib_x_mms", "amps_l1", "oil_temp_c"},
		Model: m, Holdout: 1000, Updated: time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC),
	})
	writeModel(os.Stdout, doc)
	// Output:
	// model     bearing-temp (version 42, updated 2026-03-04T05:06:07Z)
	// loss      squared, lasso
	// λ         0.05 (ladder index 3)
	// records   window 4000, held out 1000, seen 9000, rejected 0
	// held-out  none yet (no retune has scored the ladder)
	// nonzero   2 of 3 features
	//
	// feature      coefficient (raw)  standardized  mean  std
	// (intercept)                 20
	// vib_x_mms                    6        3.0000     3  0.5
	// oil_temp_c                 0.5        1.5000    55    3
}

// TestPullPMML serves a document from a store and checks that pull --pmml
// prints the daemon's PMML answer unchanged, and fails on an unknown model
// and together with --json.
func TestPullPMML(t *testing.T) {
	srv, doc := serveOneModel(t, "logistic", 9, -1.5)

	out, _, err := run(t, "pull", "pump-trip", "--from", srv.URL, "--pmml")
	if err != nil {
		t.Fatal(err)
	}
	want, err := sink.PMML(doc)
	if err != nil {
		t.Fatal(err)
	}
	if out != string(want) {
		t.Errorf("pull --pmml printed\n%s\nwant\n%s", out, want)
	}
	if !strings.HasPrefix(out, `<?xml version="1.0" encoding="UTF-8"?>`) || !strings.Contains(out, `<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4">`) {
		t.Errorf("not a PMML 4.4 document:\n%s", out)
	}
	if _, _, err := run(t, "pull", "nope", "--from", srv.URL, "--pmml"); err == nil || !strings.Contains(err.Error(), "404") {
		t.Errorf("unknown model: %v", err)
	}
	if _, _, err := run(t, "pull", "pump-trip", "--from", srv.URL, "--pmml", "--json"); err == nil {
		t.Errorf("--pmml with --json: no error")
	}
}
