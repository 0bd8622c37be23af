package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"lariat/sink"
)

// TestReplayCommand replays the bundled recording with the demo
// configuration and checks the table and every output file.
func TestReplayCommand(t *testing.T) {
	dir := t.TempDir()
	alerts, models, plots := filepath.Join(dir, "a.jsonl"), filepath.Join(dir, "m.jsonl"), filepath.Join(dir, "plots")
	stdout, stderr, err := run(t, "replay", "../../../testdata/demo-stream.jsonl", "-c", "../../../config/demo.yaml",
		"--model", "bearing-temp", "--window", "2000", "--alerts", alerts, "--models", models, "--plots", plots)
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	for _, want := range []string{"bearing-temp (version ", "vib_x_mms", "held-out"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, stdout)
		}
	}
	if !strings.Contains(stderr, "6000 records applied, 0 rejected") {
		t.Errorf("summary: %s", stderr)
	}
	var a struct {
		Index int        `json:"index"`
		Alert sink.Alert `json:"alert"`
	}
	lines := jsonLines(t, alerts)
	if len(lines) == 0 {
		t.Fatal("no alerts written")
	}
	if err := json.Unmarshal(lines[0], &a); err != nil || a.Index == 0 || a.Alert.Model != "bearing-temp" {
		t.Errorf("first alert %s: %v", lines[0], err)
	}
	var doc sink.ModelDoc
	versions := jsonLines(t, models)
	if err := json.Unmarshal(versions[len(versions)-1], &doc); err != nil || int(doc.Version) != len(versions) {
		t.Errorf("last version %d of %d: %v", doc.Version, len(versions), err)
	}
	for _, name := range []string{"path", "heldout", "coefficients", "loss"} {
		for _, ext := range []string{".png", ".svg"} {
			if fi, err := os.Stat(filepath.Join(plots, name+ext)); err != nil || fi.Size() == 0 {
				t.Errorf("%s%s: %v", name, ext, err)
			}
		}
	}
}

// TestReplayFlagsCSV replays a CSV file with settings from flags only and
// prints JSON.
func TestReplayFlagsCSV(t *testing.T) {
	stdout, stderr, err := run(t, "replay", "../../../testdata/demo-pump.csv", "--label", "trip", "--loss", "logistic",
		"--retune-every", "100", "--window", "1000", "--holdout", "300", "--drift", "page-hinkley", "--json")
	if err != nil {
		t.Fatalf("%v\n%s", err, stderr)
	}
	var doc sink.ModelDoc
	if err := json.Unmarshal([]byte(stdout), &doc); err != nil {
		t.Fatalf("%v\n%s", err, stdout)
	}
	if doc.Model != "replay" || doc.Loss != "logistic" || doc.Threshold == nil || !strings.Contains(stderr, "2000 records applied") {
		t.Errorf("model %s, loss %s, seen %d, threshold %v", doc.Model, doc.Loss, doc.Records.Seen, doc.Threshold)
	}
}

// TestReplayErrors checks the one-line errors.
func TestReplayErrors(t *testing.T) {
	bad := filepath.Join(t.TempDir(), "bad.csv")
	if err := os.WriteFile(bad, []byte("a,y\n1,2\n1,\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		args []string
		want string
	}{
		{"no model", []string{"x.jsonl", "-c", "../../../config/demo.yaml", "--model", "nope"}, `no model "nope"`},
		{"two models", []string{"x.jsonl", "-c", "../../../config/demo.yaml"}, "has 2 models"},
		{"bad setting", []string{"x.jsonl", "--drift", "sometimes"}, "replay: settings:"},
		{"missing file", []string{filepath.Join(t.TempDir(), "none.jsonl")}, "no such file"},
		{"bad cell", []string{bad, "--label", "y"}, bad + `:3: column "y": missing label`},
		{"label on json", []string{"../../../testdata/demo-stream.jsonl", "--label", "y"}, "CSV input only"},
		{"lambda 0", []string{"../../../testdata/demo-stream.jsonl", "--lambda", "0"}, "--lambda 0: the streaming pipeline fits no unpenalized model"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := run(t, append([]string{"replay"}, tc.args...)...)
			if err == nil || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") {
				t.Errorf("error %v, want one line containing %q", err, tc.want)
			}
		})
	}
}

func jsonLines(t *testing.T, file string) [][]byte {
	t.Helper()
	f, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out [][]byte
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<22)
	for sc.Scan() {
		out = append(out, bytes.Clone(sc.Bytes()))
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}
