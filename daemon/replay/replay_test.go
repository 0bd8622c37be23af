package replay_test

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"lariat/config"
	"lariat/daemon/replay"
)

const demoStream = "../../testdata/demo-stream.jsonl"

// demoModel returns the demo configuration's bearing-temp model with the
// shorter window the committed plots use.
func demoModel(t testing.TB) *config.Model {
	t.Helper()
	c, err := config.Demo()
	if err != nil {
		t.Fatal(err)
	}
	m, ok := c.Model("bearing-temp")
	if !ok {
		t.Fatal("no bearing-temp model")
	}
	m.Window.Records = 2000
	return m
}

// head writes the first n lines of file into a temporary file.
func head(t testing.TB, file string, n int) string {
	t.Helper()
	data, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	lines := bytes.SplitAfterN(data, []byte("\n"), n+1)
	out := filepath.Join(t.TempDir(), "head.jsonl")
	if err := os.WriteFile(out, bytes.Join(lines[:min(n, len(lines))], nil), 0o644); err != nil {
		t.Fatal(err)
	}
	return out
}

// outputs is everything a replay writes, as bytes.
func outputs(t *testing.T, res *replay.Result, dir string) map[string][]byte {
	t.Helper()
	out := map[string][]byte{}
	for name, v := range map[string]any{"alerts": res.Alerts, "versions": res.Versions,
		"history": res.History, "path": res.Path, "rejects": res.Rejects} {
		b, err := json.Marshal(v)
		if err != nil {
			t.Fatal(err)
		}
		out[name] = b
	}
	if err := res.WritePlots(dir); err != nil {
		t.Fatal(err)
	}
	for _, name := range replay.PlotNames {
		b, err := os.ReadFile(filepath.Join(dir, name+".svg"))
		if err != nil {
			t.Fatal(err)
		}
		out[name+".svg"] = b
	}
	return out
}

// TestDeterministic replays a recording twice: alerts, versions (with their
// "updated" time, the record's), history, path and the SVG plots are
// byte-identical.
func TestDeterministic(t *testing.T) {
	file := demoStream
	if testing.Short() {
		file = head(t, demoStream, 3600)
	}
	var runs []map[string][]byte
	for range 2 {
		res, err := replay.Run(file, replay.Options{Model: demoModel(t)})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Versions) == 0 || len(res.History) == 0 || res.Final == nil || res.Path == nil {
			t.Fatalf("empty replay: %d versions, %d retunes", len(res.Versions), len(res.History))
		}
		if len(res.Alerts) == 0 {
			t.Error("no alerts: the recording's fault should raise a performance drift")
		}
		runs = append(runs, outputs(t, res, t.TempDir()))
	}
	for name, a := range runs[0] {
		if !bytes.Equal(a, runs[1][name]) {
			t.Errorf("%s differs between two replays", name)
		}
	}
}

// TestPlots checks the plot files: present, non-empty, PNG magic, SVG that
// parses as XML.
func TestPlots(t *testing.T) {
	res, err := replay.Run(head(t, demoStream, 1200), replay.Options{Model: demoModel(t)})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := res.WritePlots(dir); err != nil {
		t.Fatal(err)
	}
	for _, name := range replay.PlotNames {
		png, err := os.ReadFile(filepath.Join(dir, name+".png"))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) {
			t.Errorf("%s.png: not a PNG", name)
		}
		svg, err := os.ReadFile(filepath.Join(dir, name+".svg"))
		if err != nil {
			t.Fatal(err)
		}
		if len(svg) == 0 {
			t.Fatalf("%s.svg is empty", name)
		}
		dec := xml.NewDecoder(bytes.NewReader(svg))
		for {
			_, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s.svg: %v", name, err)
			}
		}
	}
}

// TestCSV replays a CSV file with an ID column (skipped), a time column in
// both formats and a row the decoder rejects.
func TestCSV(t *testing.T) {
	var b strings.Builder
	b.WriteString("id,when,a,b,y\n")
	for i := range 600 {
		when := "2026-02-01T00:00:00Z"
		if i > 0 {
			when = "17699040" + pad(i)
		}
		a, bb := float64(i%7), float64(i%5)
		y := 2*a - bb + 0.1*float64(i%3)
		b.WriteString("u" + itoa(i) + "," + when + "," + ftoa(a) + "," + ftoa(bb) + "," + ftoa(y) + "\n")
	}
	file := filepath.Join(t.TempDir(), "s.csv")
	if err := os.WriteFile(file, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	m := replay.DefaultModel("csv")
	m.Retune.Every = 100
	m.Window.Records = 200
	m.Holdout.Records = 50
	if err := replay.Check(&m); err != nil {
		t.Fatal(err)
	}
	res, err := replay.Run(file, replay.Options{Model: &m, Label: "y", Time: "when"})
	if err != nil {
		t.Fatal(err)
	}
	if res.Applied != 600 || res.Rejected != 0 {
		t.Fatalf("applied %d, rejected %d", res.Applied, res.Rejected)
	}
	if got := strings.Join(res.Names, ","); got != "a,b" {
		t.Errorf("features %q, want a,b (id skipped, when is the time)", got)
	}
	if res.Final == nil || res.Final.Coefficients["a"] <= 0 || res.Final.Coefficients["b"] >= 0 {
		t.Errorf("final model %+v", res.Final)
	}
	if len(res.History) != 6 {
		t.Errorf("%d retunes, want 6", len(res.History))
	}

	bad := filepath.Join(t.TempDir(), "bad.csv")
	if err := os.WriteFile(bad, []byte("a,y\n1,2\nx,3\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err = replay.Run(bad, replay.Options{Model: &m, Label: "y"})
	if err == nil || err.Error() != `replay: `+bad+`:3: column "a": not a number "x"` {
		t.Errorf("error %v", err)
	}
}

// TestNoTime gives records without "t" the previous time plus 1 ms.
func TestNoTime(t *testing.T) {
	file := filepath.Join(t.TempDir(), "s.jsonl")
	var b strings.Builder
	b.WriteString(`{"t":1000,"y":1,"x":{"a":1}}` + "\n\n")
	b.WriteString(`{"y":2,"x":{"a":2}}` + "\n")
	b.WriteString(`not json` + "\n")
	if err := os.WriteFile(file, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	m := replay.DefaultModel("nt")
	m.Lambda = 0.1 // fixed λ publishes from the first record
	m.Holdout.Every = 0
	res, err := replay.Run(file, replay.Options{Model: &m})
	if err != nil {
		t.Fatal(err)
	}
	if res.Applied != 2 || res.Rejected != 1 || res.Rejects[0].Line != 4 || res.Rejects[0].Reason != "malformed" {
		t.Fatalf("applied %d, rejects %+v", res.Applied, res.Rejects)
	}
	if got := res.Final.Updated.UnixMilli(); got != 1001 {
		t.Errorf("final version at %d ms, want 1001", got)
	}
}

func itoa(i int) string { return ftoa(float64(i)) }

func ftoa(f float64) string { return strings.TrimSuffix(strings.TrimRight(sprintf(f), "0"), ".") }

func pad(i int) string {
	s := itoa(i)
	for len(s) < 5 {
		s = "0" + s
	}
	return s
}

func sprintf(f float64) string { return strconv.FormatFloat(f, 'f', 6, 64) }
