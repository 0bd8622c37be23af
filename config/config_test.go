package config

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"
)

func TestDefaultsFilled(t *testing.T) {
	c, err := Load("testdata/minimal.good.yaml")
	if err != nil {
		t.Fatal(err)
	}
	want := Default()
	want.Models = []Model{DefaultModel()}
	want.Models[0].Name, want.Models[0].Subject = "m1", "plant.m1"
	want.src = c.src
	if !reflect.DeepEqual(c, want) {
		t.Errorf("defaults not filled:\n got  %#v\n want %#v", c, want)
	}
	// Spot-check the documented values, so a changed default is noticed.
	m := c.Models[0]
	checks := []struct {
		name      string
		got, want any
	}{
		{"nats.listen", c.NATS.Listen, "127.0.0.1:4222"},
		{"nats.pending_msgs", c.NATS.PendingMsgs, 1048576},
		{"nats.pending_bytes", c.NATS.PendingBytes, 268435456},
		{"http.listen", c.HTTP.Listen, "127.0.0.1:8080"},
		{"http.max_body_bytes", c.HTTP.MaxBodyBytes, int64(1048576)},
		{"subject_prefix", c.SubjectPrefix, "lariat"},
		{"data_dir", c.DataDir, "./lariat-data"},
		{"log", c.Log, Log{Level: "info", Format: "auto"}},
		{"loss", m.Loss, "squared"},
		{"penalty", m.Penalty, "lasso"},
		{"ladder", m.Ladder, Ladder{Size: 12, Floor: 0.001}},
		{"window", m.Window, Window{Records: 10000}},
		{"holdout", m.Holdout, Holdout{Every: 5, Records: 2000}},
		{"retune", m.Retune, Retune{Every: 500, Rule: "one-se"}},
		{"learner", m.Learner, Learner{Steps: 2, IdleSteps: 64, HalfLife: 10000}},
		{"publish", m.Publish, Publish{Heartbeat: Duration(30 * time.Second), Tolerance: 0.001}},
		{"max_features", m.MaxFeatures, 256},
		{"missing", m.Missing, "impute"},
		{"queue", m.Queue, 4096},
		{"threshold", m.Threshold, Threshold{Mode: "fixed", Value: 0.5, Target: 0.01}},
		{"drift", m.Drift, Drift{Performance: "adwin", Delta: 0.002, PSI: 0.25, MeanShift: 3, Cooldown: Duration(10 * time.Minute), Adapt: true}},
	}
	for _, k := range checks {
		if !reflect.DeepEqual(k.got, k.want) {
			t.Errorf("%s = %v, want %v", k.name, k.got, k.want)
		}
	}
}

func TestPartialSectionKeepsDefaults(t *testing.T) {
	c, err := Parse("p.yaml", []byte("models:\n  - name: a\n    subject: s.a\n    ladder: {size: 20}\n    drift: {cooldown: 1m}\n"))
	if err != nil {
		t.Fatal(err)
	}
	m := c.Models[0]
	if m.Ladder != (Ladder{Size: 20, Floor: 0.001}) {
		t.Errorf("ladder = %+v", m.Ladder)
	}
	if m.Drift.Cooldown.Std() != time.Minute || !m.Drift.Adapt || m.Drift.PSI != 0.25 {
		t.Errorf("drift = %+v", m.Drift)
	}
}

func TestExampleAndDemoContents(t *testing.T) {
	ex, err := Load("example.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(ex.Models) != 2 {
		t.Fatalf("example has %d models", len(ex.Models))
	}
	lin, ok1 := ex.Model("example-linear")
	logi, ok2 := ex.Model("example-logistic")
	if !ok1 || !ok2 || lin.Subject != "plant.example.linear" || logi.Subject != "plant.example.logistic" ||
		lin.Loss != LossSquared || logi.Loss != LossLogistic || lin.Penalty != PenaltyLasso || logi.Penalty != PenaltyLasso {
		t.Errorf("example models: %+v %+v", lin, logi)
	}
	if ex.NATS.External() || ex.NATS.Listen != "127.0.0.1:4222" || ex.HTTP.Listen != "127.0.0.1:8080" || ex.DataDir != "./lariat-data" {
		t.Errorf("example addresses: %+v %+v %q", ex.NATS, ex.HTTP, ex.DataDir)
	}

	d, err := Demo()
	if err != nil {
		t.Fatal(err)
	}
	pt, ok1 := d.Model("pump-trip")
	bt, ok2 := d.Model("bearing-temp")
	if !ok1 || !ok2 {
		t.Fatalf("demo models: %+v", d.Models)
	}
	if pt.Subject != "plant.demo.pump.trip" || pt.ScoreSubject != "plant.demo.pump.score" || !pt.Logistic() ||
		pt.Threshold.Mode != ThresholdFPR || pt.Threshold.Target != 0.05 || pt.PenaltyMix() != 1 {
		t.Errorf("pump-trip = %+v", pt)
	}
	if bt.Subject != "plant.demo.pump.bearing" || bt.Logistic() || bt.Penalty != PenaltyElasticNet || bt.PenaltyMix() != 0.8 {
		t.Errorf("bearing-temp = %+v", bt)
	}
	for _, m := range d.Models {
		if m.Publish.Heartbeat.Std() != 5*time.Second || m.Retune.Every != 200 || m.Holdout.Every != 5 ||
			m.Window.Records != 4000 || m.Drift.Performance == DriftOff || m.Drift.Cooldown.Std() != time.Minute {
			t.Errorf("%s: %+v", m.Name, m)
		}
	}
}

func TestRoundTrip(t *testing.T) {
	for _, f := range []string{"example.yaml", "demo.yaml", "testdata/full.good.yaml"} {
		t.Run(f, func(t *testing.T) {
			c, err := Load(f)
			if err != nil {
				t.Fatal(err)
			}
			c2, err := Parse("again.yaml", []byte(c.String()))
			if err != nil {
				t.Fatalf("String() does not parse: %v\n%s", err, c)
			}
			c2.src = c.src
			if !reflect.DeepEqual(c, c2) {
				t.Errorf("round trip differs:\n%s\n---\n%s", c, c2)
			}
		})
	}
}

func TestValidateInCode(t *testing.T) {
	c := Default()
	if err := c.Validate(); err == nil || !strings.Contains(err.Error(), "models: at least one model is required") {
		t.Fatalf("empty Default validates: %v", err)
	}
	m := DefaultModel()
	m.Name, m.Subject = "a", "plant.a"
	c.Models = append(c.Models, m)
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	c.Models[0].Threshold.Mode = ThresholdFPR // squared model
	err := c.Validate()
	if err == nil || err.Error() != `models[0].threshold: is only for logistic models (loss is "squared")` {
		t.Fatalf("got %v", err)
	}
}

func TestMergeAndAnchors(t *testing.T) {
	c, err := Load("testdata/full.good.yaml")
	if err != nil {
		t.Fatal(err)
	}
	a, b := c.Models[0], c.Models[1]
	if b.Name != "flow-3" || b.Mix != 0.75 || b.Learner != a.Learner || !reflect.DeepEqual(b.Features, a.Features) {
		t.Errorf("merge: %+v", b)
	}
	if c.Models[2].Window != a.Window || a.Window.Span.Std() != 90*time.Minute {
		t.Errorf("alias: %+v", c.Models[2].Window)
	}
	if c.NATS.AuthMethod() != "token" || !c.NATS.External() || c.NATS.PendingBytes != 1<<20 {
		t.Errorf("nats: %+v", c.NATS)
	}
}

func TestEmptyAndOddDocuments(t *testing.T) {
	tests := []struct{ name, data, want string }{
		{"empty", "", "e.yaml:1: models: at least one model is required"},
		{"comment only", "# nothing\n", "e.yaml:1: models: at least one model is required"},
		{"null", "~\n", "e.yaml:1: models: at least one model is required"},
		{"scalar", "hello\n", `e.yaml:1: expected a mapping, got "hello"`},
		{"non-scalar key", "? [a]\n: 1\nmodels: [{name: a, subject: s}]\n", "e.yaml:1: a key must be a plain name, got a list"},
		{"null model", "models:\n  -\n", "e.yaml:2: models[0].name: is required"},
		{"binary", "models: [{name: !!binary aGk=, subject: s}]\n", "e.yaml:1: models[0].name: expected a string"},
		{"big int", "models: [{name: a, subject: s, queue: 99999999999999999999}]\n", "e.yaml:1: models[0].queue: expected an integer"},
		{"nan", "models: [{name: a, subject: s, lambda: .nan}]\n", "e.yaml:1: models[0].lambda: NaN is out of range"},
		{"inf", "models: [{name: a, subject: s, drift: {psi: .inf}}]\n", "e.yaml:1: models[0].drift.psi: +Inf is out of range"},
		{"alias line", "models:\n  - name: &n pump\n    subject: s\n    queue: *n\n", `e.yaml:4: models[0].queue: expected an integer, got "pump"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Parse("e.yaml", []byte(tt.data))
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("got %v, want %q", err, tt.want)
			}
		})
	}
}

func TestAliasBomb(t *testing.T) {
	var b strings.Builder
	b.WriteString("a0: &a0 [x, x, x, x, x, x, x, x, x, x]\n")
	for i := 1; i < 9; i++ {
		b.WriteString("a" + string(rune('0'+i)) + ": &a" + string(rune('0'+i)) + " [")
		for j := 0; j < 10; j++ {
			if j > 0 {
				b.WriteString(", ")
			}
			b.WriteString("*a" + string(rune('0'+i-1)))
		}
		b.WriteString("]\n")
	}
	b.WriteString("models:\n  - name: m\n    subject: s\n    features: *a8\n")
	start := time.Now()
	_, err := Parse("bomb.yaml", []byte(b.String()))
	if err == nil {
		t.Fatal("alias bomb parsed")
	}
	if time.Since(start) > 5*time.Second {
		t.Errorf("took %v", time.Since(start))
	}
}

func TestMergeBomb(t *testing.T) {
	var b strings.Builder
	b.WriteString("models:\n  - &m0 {name: a, subject: s}\n")
	for i := 1; i < 30; i++ {
		fmt.Fprintf(&b, "  - &m%d {<<: [*m%d, *m%d, *m%d, *m%d], name: a%d}\n", i, i-1, i-1, i-1, i-1, i)
	}
	start := time.Now()
	_, err := Parse("bomb.yaml", []byte(b.String()))
	if err == nil || !strings.Contains(err.Error(), "too large once its aliases are expanded") {
		t.Errorf("merge bomb: %v", err)
	}
	if time.Since(start) > 5*time.Second {
		t.Errorf("took %v", time.Since(start))
	}
}

func TestSyntaxErrorInLongFile(t *testing.T) {
	data := []byte(strings.Repeat("# filler line of a long comment block to make the file large\n", 50000) + "a: b: c\n")
	start := time.Now()
	_, err := Parse("long.yaml", data)
	if err == nil || !strings.Contains(err.Error(), "invalid YAML") {
		t.Errorf("got %v", err)
	}
	if time.Since(start) > 5*time.Second {
		t.Errorf("took %v", time.Since(start))
	}
}

func TestLoadErrors(t *testing.T) {
	if _, err := Load(filepath.Join(t.TempDir(), "missing.yaml")); err == nil || !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
	big := filepath.Join(t.TempDir(), "big.yaml")
	if err := os.WriteFile(big, make([]byte, maxFileBytes+1), 0o600); err != nil {
		t.Fatal(err)
	}
	if _, err := Load(big); err == nil || !strings.Contains(err.Error(), "larger than") {
		t.Errorf("big file: %v", err)
	}
}

func TestFieldErrorFormat(t *testing.T) {
	tests := []struct {
		e    FieldError
		want string
	}{
		{FieldError{"f.yaml", 3, "models[0].loss", "bad"}, "f.yaml:3: models[0].loss: bad"},
		{FieldError{"f.yaml", 0, "models", "bad"}, "f.yaml: models: bad"},
		{FieldError{"", 7, "x", "bad"}, "line 7: x: bad"},
		{FieldError{"", 0, "x", "bad"}, "x: bad"},
		{FieldError{"f.yaml", 2, "", "bad"}, "f.yaml:2: bad"},
	}
	for _, tt := range tests {
		if got := tt.e.Error(); got != tt.want {
			t.Errorf("got %q, want %q", got, tt.want)
		}
	}
	es := Errors{{Line: 5, Msg: "b"}, {Line: 0, Msg: "c"}, {Line: 2, Msg: "a"}}
	es.sort()
	if es.Error() != "line 2: a\nline 5: b\nc" {
		t.Errorf("sorted: %q", es.Error())
	}
	var fe *FieldError
	if !errors.As(error(es), &fe) || fe.Msg != "a" {
		t.Errorf("errors.As: %v", fe)
	}
}

func TestModelHelpers(t *testing.T) {
	m := DefaultModel()
	for _, tt := range []struct {
		penalty string
		mix     float64
		want    float64
	}{{PenaltyLasso, 0, 1}, {PenaltyRidge, 0, 0}, {PenaltyElasticNet, 0.3, 0.3}} {
		m.Penalty, m.Mix = tt.penalty, tt.mix
		if got := m.PenaltyMix(); got != tt.want {
			t.Errorf("%s: PenaltyMix = %v, want %v", tt.penalty, got, tt.want)
		}
	}
	if m.FixedLambda() || m.HoldoutOff() || m.Logistic() {
		t.Error("default model is fixed-λ, holdout-off or logistic")
	}
	c := &Config{}
	if _, ok := c.Model("x"); ok {
		t.Error("found a model in an empty config")
	}
	for level, want := range map[string]string{"debug": "DEBUG", "info": "INFO", "warn": "WARN", "error": "ERROR", "": "INFO"} {
		if got := (Log{Level: level}).SlogLevel().String(); got != want {
			t.Errorf("SlogLevel(%q) = %s", level, got)
		}
	}
}

func BenchmarkParse(b *testing.B) {
	data, err := os.ReadFile("example.yaml")
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Parse("example.yaml", data); err != nil {
			b.Fatal(err)
		}
	}
}

func FuzzParse(f *testing.F) {
	files, _ := filepath.Glob("testdata/*.yaml")
	for _, name := range append(files, "example.yaml") {
		data, err := os.ReadFile(name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := Parse("fuzz.yaml", data)
		if (c == nil) == (err == nil) {
			t.Fatalf("Parse returned c=%v err=%v", c != nil, err)
		}
		if err != nil {
			var es Errors
			if !errors.As(err, &es) || len(es) == 0 {
				t.Fatalf("error is not Errors: %v", err)
			}
			return
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("parsed config does not validate: %v", err)
		}
	})
}
