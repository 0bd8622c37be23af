package daemon

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
)

// hostileModels are the models of TestHostileRecords: a linear model that
// learns its channel names (with a bound on "c" and on the label), a
// logistic one, one with a fixed feature list for the "v" form, and one
// that rejects missing channels.
func hostileModels() []config.Model {
	lin := testModel("h-lin", "test.h.lin", config.LossSquared)
	lin.Guard.Bounds = []config.Bound{{Feature: "c", Min: config.Limit{V: -100, Set: true}, Max: config.Limit{V: 100, Set: true}}}
	lin.Guard.Label = config.Range{Max: config.Limit{V: 1e6, Set: true}}
	logit := testModel("h-log", "test.h.log", config.LossLogistic)
	vec := testModel("h-vec", "test.h.vec", config.LossSquared)
	vec.Features = []string{"a", "b", "c"}
	strict := testModel("h-strict", "test.h.strict", config.LossSquared)
	strict.Features = []string{"a", "b"}
	strict.Missing = config.MissingReject
	ms := []config.Model{lin, logit, vec, strict}
	for i := range ms {
		ms[i].MaxFeatures = hostileCap // small, so that saving the state for every probe stays cheap
	}
	return ms
}

// hostileCap is the feature cap of the models of the hostile-record tests.
const hostileCap = 32

// hostileCase is one probe: a message for a model, and the reason it must
// be rejected with ("" = accepted).
type hostileCase struct {
	name, model string
	body        []byte
	reason      string
}

// hostileCases reconstructs the probe of the issue on hostile input: every
// kind of malformed and adversarial record a new user tried, one case per
// kind. now is the wall clock the times are relative to.
func hostileCases(now time.Time) []hostileCase {
	lin, log, vec, strict := "h-lin", "h-log", "h-vec", "h-strict"
	b := func(s string) []byte { return []byte(s) }
	deep := strings.Repeat("[", 20000) + strings.Repeat("]", 20000)
	deepOK := strings.Repeat("[", 100) + strings.Repeat("]", 100)
	many := &strings.Builder{}
	many.WriteString(`{"y":1,"x":{`)
	for i := range 5000 {
		fmt.Fprintf(many, `"n%04d":1,`, i)
	}
	many.WriteString(`"a":1}}`)
	ms := func(d time.Duration) string { return strconv.FormatInt(now.Add(d).UnixMilli(), 10) }
	R := struct{ mal, typ, nf, lab, tmf, mis, dim, w, tim, name, over, oor, imp string }{
		record.ReasonMalformed, record.ReasonType, record.ReasonNotFinite, record.ReasonLabel,
		record.ReasonTooManyFeatures, record.ReasonMissingFeature, record.ReasonDimension,
		record.ReasonWeight, record.ReasonTime, record.ReasonName, record.ReasonOversize,
		record.ReasonOutOfRange, record.ReasonImplausible,
	}
	return []hostileCase{
		// Not a record at all.
		{"empty message", lin, b(``), R.mal},
		{"whitespace only", lin, b(" \n\t "), R.mal},
		{"not JSON", lin, b(`hello`), R.mal},
		{"JSON array", lin, b(`[1,2,3]`), R.mal},
		{"JSON string", lin, b(`"y"`), R.mal},
		{"JSON null", lin, b(`null`), R.mal},
		{"truncated object", lin, b(`{"y":1,"x":{"a":1}`), R.mal},
		{"trailing garbage", lin, b(`{"y":1,"x":{"a":1}}x`), R.mal},
		{"two records in one message", lin, b(`{"y":1,"x":{"a":1}}{"y":1,"x":{"a":1}}`), R.mal},
		{"byte order mark", lin, b("\xef\xbb\xbf" + `{"y":1,"x":{"a":1}}`), R.mal},
		{"deep nesting in an unknown field", lin, b(`{"y":1,"x":{"a":1},"z":` + deep + `}`), R.mal},
		{"moderate nesting in an unknown field", lin, b(`{"y":1,"x":{"a":10},"z":` + deepOK + `}`), ""},
		{"deep nesting as a value", lin, b(`{"y":1,"x":{"a":` + deep + `}}`), R.mal},
		{"oversize (1 MB)", lin, b(`{"y":1,"x":{"a":1},"key":"` + strings.Repeat("k", 1<<20) + `"}`), R.over},
		// JSON that is not valid, or ambiguous.
		{"bare NaN", lin, b(`{"y":1,"x":{"a":NaN}}`), R.mal},
		{"bare Infinity", lin, b(`{"y":1,"x":{"a":Infinity}}`), R.mal},
		{"duplicate top-level key", lin, b(`{"y":1,"y":2,"x":{"a":1}}`), R.mal},
		{"duplicate channel", lin, b(`{"y":1,"x":{"a":1,"a":2}}`), R.mal},
		{"both x and v", vec, b(`{"y":1,"x":{"a":1},"v":[1,2,3]}`), R.mal},
		{"invalid UTF-8 in a key string", lin, b("{\"y\":1,\"x\":{\"a\":1},\"key\":\"\xff\xfe\"}"), R.mal},
		{"invalid UTF-8 in a channel name", lin, b("{\"y\":1,\"x\":{\"\xc3\x28\":1}}"), R.mal},
		{"leading zero", lin, b(`{"y":1,"x":{"a":01}}`), R.mal},
		{"hex number", lin, b(`{"y":1,"x":{"a":0x10}}`), R.mal},
		// Numbers.
		{"1e400 overflows", lin, b(`{"y":1,"x":{"a":1e400}}`), R.nf},
		{"-1e400 overflows", lin, b(`{"y":1,"x":{"a":-1e400}}`), R.nf},
		{"1e308 is beyond the learner's range", lin, b(`{"y":1,"x":{"a":1e308}}`), R.nf},
		{"1e29 on a warm model", lin, b(`{"y":1,"x":{"a":1e29}}`), R.imp},
		{"-1e29 on a warm model", lin, b(`{"y":1,"x":{"b":-1e29}}`), R.imp},
		{"y = 1e40", vec, b(`{"y":1e40,"x":{"a":10}}`), R.imp},
		{"y = 1e60", vec, b(`{"y":1e60,"x":{"a":10}}`), R.nf},
		{"y above the configured label bound", lin, b(`{"y":2e6,"x":{"a":10}}`), R.oor},
		{"a bounded channel out of range", lin, b(`{"y":1,"x":{"a":10,"c":101}}`), R.oor},
		{"a bounded channel in range", lin, b(`{"y":1,"x":{"a":10,"c":-99}}`), ""},
		{"negative zero", lin, b(`{"y":1,"x":{"a":-0}}`), ""},
		{"subnormal", lin, b(`{"y":1,"x":{"b":5e-324}}`), ""},
		{"number as a string", lin, b(`{"y":1,"x":{"a":"1.5"}}`), R.typ},
		{"NaN as a string", lin, b(`{"y":"NaN","x":{"a":1}}`), R.typ},
		{"boolean channel", lin, b(`{"y":1,"x":{"a":true}}`), R.typ},
		{"object as a channel", lin, b(`{"y":1,"x":{"a":{"b":1}}}`), R.typ},
		{"array as a channel", lin, b(`{"y":1,"x":{"a":[1]}}`), R.typ},
		{"null channel is missing", lin, b(`{"y":1,"x":{"a":null}}`), ""},
		{"x is an array", lin, b(`{"y":1,"x":[1,2]}`), R.typ},
		// Labels.
		{"label as a string", lin, b(`{"y":"1","x":{"a":1}}`), R.typ},
		{"label true on a linear model", lin, b(`{"y":true,"x":{"a":1}}`), R.typ},
		{"label null", lin, b(`{"y":null,"x":{"a":1}}`), R.lab},
		{"no label", lin, b(`{"x":{"a":1}}`), R.lab},
		{"logistic label 2", log, b(`{"y":2,"x":{"a":1}}`), R.lab},
		{"logistic label 0.5", log, b(`{"y":0.5,"x":{"a":1}}`), R.lab},
		{"logistic label true", log, b(`{"y":true,"x":{"a":1}}`), ""},
		// Weights.
		{"w = 0", lin, b(`{"y":1,"x":{"a":10},"w":0}`), R.w},
		{"w = -1", lin, b(`{"y":1,"x":{"a":10},"w":-1}`), R.w},
		{`w = "1"`, lin, b(`{"y":1,"x":{"a":10},"w":"1"}`), R.typ},
		{"w = 1e-300", lin, b(`{"y":1,"x":{"a":10},"w":1e-300}`), R.w},
		{"w = 1e300", lin, b(`{"y":1,"x":{"a":10},"w":1e300}`), R.w},
		{"w = null is 1", lin, b(`{"y":1,"x":{"a":10},"w":null}`), ""},
		// Times.
		{"far-future t", lin, b(`{"y":1,"x":{"a":10},"t":"9999-12-31T23:59:59Z"}`), R.tim},
		{"t an hour ahead", lin, b(`{"y":1,"x":{"a":10},"t":` + ms(time.Hour) + `}`), R.tim},
		{"t a minute ahead (within time_skew)", lin, b(`{"y":1,"x":{"a":10},"t":` + ms(time.Minute) + `}`), ""},
		{"far-past t", lin, b(`{"y":1,"x":{"a":10},"t":"1970-01-01T00:00:00.001Z"}`), ""},
		{"t 1e30 ms", lin, b(`{"y":1,"x":{"a":10},"t":1e30}`), R.tim},
		{"t garbage", lin, b(`{"y":1,"x":{"a":10},"t":"yesterday"}`), R.tim},
		{"t a boolean", lin, b(`{"y":1,"x":{"a":10},"t":true}`), R.typ},
		// Channel names.
		{"empty name", lin, b(`{"y":1,"x":{"":1}}`), R.name},
		{"control character in a name", lin, b(`{"y":1,"x":{"a\u0001":1}}`), R.name},
		{"NUL in a name", lin, b(`{"y":1,"x":{"a\u0000":1}}`), R.name},
		{"lone high surrogate", lin, b(`{"y":1,"x":{"\ud800":1}}`), R.name},
		{"lone low surrogate", lin, b(`{"y":1,"x":{"p\udc00":1}}`), R.name},
		{"reversed surrogate pair", lin, b(`{"y":1,"x":{"\udc00\ud800":1}}`), R.name},
		{"name of 300 bytes", lin, b(`{"y":1,"x":{"` + strings.Repeat("n", 300) + `":1}}`), R.name},
		{"valid surrogate pair is a new channel", lin, b(`{"y":1,"x":{"a":10,"\ud83d\ude00":1}}`), ""},
		// Shape.
		{"neither x nor v", lin, b(`{"y":1}`), R.mis},
		{"empty x", lin, b(`{"y":1,"x":{}}`), ""},
		{"v without a feature list", lin, b(`{"y":1,"v":[1]}`), R.dim},
		{"v too short", vec, b(`{"y":1,"v":[1,2]}`), R.dim},
		{"v too long", vec, b(`{"y":1,"v":[1,2,3,4]}`), R.dim},
		{"v with a string", vec, b(`{"y":1,"v":[1,"2",3]}`), R.typ},
		{"v with null is missing", vec, b(`{"y":1,"v":[1,null,3]}`), ""},
		{"missing channel, policy reject", strict, b(`{"y":1,"x":{"a":1}}`), R.mis},
		{"unknown top-level field", lin, b(`{"y":1,"x":{"a":10},"extra":{"k":[1,2]}}`), ""},
		{"long key", lin, b(`{"y":1,"x":{"a":10},"key":"` + strings.Repeat("k", 60000) + `"}`), ""},
		// Past the feature cap: the names that find no free slot are dropped
		// and counted and the record trains on its known channels; under
		// missing: reject the record is rejected as before.
		{"past-cap: 5,000 names in one record, names past the cap dropped", lin, b(many.String()), ""},
		{"past-cap: 5,000 names in one record, policy reject", strict, b(strings.Replace(many.String(), "{", `{"a":1,"b":2,`, 1)), R.tmf},
	}
}

// TestHostileRecords sends every probe through the daemon's own decoding
// (the worker's decoder and its time_skew check) and the model's pipeline,
// as the model goroutine does, and checks for each its outcome and reason;
// that a rejected record left the model bit for bit as it was (the whole
// saved pipeline state, or for a guard rejection everything but the
// guard's run length: ladder and window, held-out ring, counters); and that
// after an accepted one the model still publishes a new version with
// finite numbers. The wiring through NATS (count, reject subject) is
// TestRejects' and TestGuardOverNATS'.
func TestHostileRecords(t *testing.T) {
	d, err := New(testConfig(t, hostileModels()...))
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	at := now
	warm(t, d, at)
	for _, tc := range hostileCases(now) {
		t.Run(tc.name, func(t *testing.T) {
			w := d.byName[tc.model]
			at = at.Add(2 * time.Second)
			before := pipeState(t, w)
			reason := applyMsg(w, tc.body, at)
			if reason != tc.reason {
				t.Fatalf("reason %q, want %q", reason, tc.reason)
			}
			if reason != "" {
				if err := before.same(pipeState(t, w), reason == record.ReasonImplausible); err != nil {
					t.Fatalf("rejected record changed the model: %v", err)
				}
				return
			}
			checkPublishes(t, w, at)
		})
	}
}

// TestHostileFlood is the flood of fresh names of the issue: 300 records,
// each with a new name, into a model with a cap of 32. The names that find
// the cap reached are dropped and counted (lariat_features_dropped_total),
// every record trains on its known channels, and the model keeps
// publishing; a legitimate new channel right after the flood is dropped
// too (its slot comes back when the junk names age out, a window later:
// TestNameFlood).
func TestHostileFlood(t *testing.T) {
	d, err := New(testConfig(t, hostileModels()...))
	if err != nil {
		t.Fatal(err)
	}
	at := time.Now()
	warm(t, d, at)
	w := d.byName["h-lin"]
	known := w.dec.Features()
	dropped := func() float64 {
		return metricValue(t, d, "lariat_features_dropped_total", map[string]string{"model": "h-lin"})
	}
	for i := range 300 {
		at = at.Add(time.Second)
		if r := applyMsg(w, fmt.Appendf(nil, `{"y":1,"x":{"a":10,"junk%d":1}}`, i), at); r != "" {
			t.Fatalf("record %d: reason %q, want accepted with its new name dropped past the cap", i, r)
		}
	}
	if got, want := dropped(), float64(300-(hostileCap-known)); got != want {
		t.Errorf("dropped %v junk values, want %v (300 names, %d free slots)", got, want, hostileCap-known)
	}
	if r := applyMsg(w, []byte(`{"y":1,"x":{"a":10,"new_channel":1}}`), at); r != "" {
		t.Errorf("a legitimate new channel after the flood: %q, want accepted with the name dropped", r)
	}
	if got, want := dropped(), float64(301-(hostileCap-known)); got != want {
		t.Errorf("dropped %v values after the new channel, want %v", got, want)
	}
	checkPublishes(t, w, at.Add(time.Second))
}

// warm applies 300 ordinary records to every model of d.
func warm(t *testing.T, d *Daemon, at time.Time) {
	t.Helper()
	rng := rand.New(rand.NewPCG(12, 12))
	for _, w := range d.workers {
		for i := range 300 {
			a, b, c := 10+rng.NormFloat64(), rng.NormFloat64(), 5+2*rng.NormFloat64()
			y := 2*a - b + rng.NormFloat64()
			if w.cfg.Logistic() {
				y = float64(i % 2)
			}
			msg := fmt.Appendf(nil, `{"y":%g,"x":{"a":%g,"b":%g,"c":%g}}`, y, a, b, c)
			if w.cfg.Name == "h-strict" {
				msg = fmt.Appendf(nil, `{"y":%g,"x":{"a":%g,"b":%g}}`, y, a, b)
			}
			if r := applyMsg(w, msg, at); r != "" {
				t.Fatalf("%s warm-up record %d: %s", w.name, i, r)
			}
		}
		checkPublishes(t, w, at)
	}
}

// applyMsg decodes msg as the worker's intake does and applies it as its
// model goroutine does; it returns the reject reason, or "".
func applyMsg(w *worker, msg []byte, at time.Time) string {
	var rec record.Record
	if err := w.decode(msg, &rec); err != nil {
		r, _ := decodeReason(err)
		return r
	}
	if _, err := w.pipe.Apply(&rec, w.dec.Names(), at); err != nil {
		r, _ := decodeReason(err)
		return r
	}
	return ""
}

// pipeSnap is a model's state for comparison: the whole saved pipeline,
// and its parts that a guard rejection must leave as they were.
type pipeSnap struct {
	all, ladder, hold []byte
	applied, held     uint64
}

func pipeState(t *testing.T, w *worker) pipeSnap {
	t.Helper()
	var s pipeSnap
	var err error
	if s.all, err = w.pipe.MarshalBinary(); err != nil {
		t.Fatal(err)
	}
	if s.ladder, err = w.pipe.Ladder().MarshalBinary(); err != nil {
		t.Fatal(err)
	}
	if h := w.pipe.Holdout(); h != nil {
		if s.hold, err = h.MarshalBinary(); err != nil {
			t.Fatal(err)
		}
	}
	s.applied, s.held = w.pipe.Counts()
	return s
}

// same compares two snapshots: bit for bit, or with guardRun only the
// ladder (with its window), the held-out ring and the counts, since a
// guard rejection moves the guard's run length (pipeline.TestGuardRules
// checks that it moves nothing else).
func (a pipeSnap) same(b pipeSnap, guardRun bool) error {
	switch {
	case !guardRun && !bytes.Equal(a.all, b.all):
		return fmt.Errorf("pipeline state differs")
	case !bytes.Equal(a.ladder, b.ladder):
		return fmt.Errorf("ladder differs")
	case !bytes.Equal(a.hold, b.hold):
		return fmt.Errorf("held-out ring differs")
	case a.applied != b.applied || a.held != b.held:
		return fmt.Errorf("counts %d/%d, were %d/%d", b.applied, b.held, a.applied, a.held)
	}
	return nil
}

// checkPublishes forces a publication at at and checks that a new version
// goes out with finite numbers.
func checkPublishes(t *testing.T, w *worker, at time.Time) {
	t.Helper()
	v := w.pipe.Version()
	s, err := w.pipe.Publish(at, 0, true)
	if err != nil || s == nil {
		t.Fatalf("publish after an accepted record: %v (snapshot %v)", err, s != nil)
	}
	if s.Doc.Version != v+1 {
		t.Errorf("version %d, want %d", s.Doc.Version, v+1)
	}
	if math.IsNaN(s.Doc.Intercept) || math.IsInf(s.Doc.Intercept, 0) {
		t.Errorf("intercept %v", s.Doc.Intercept)
	}
	for k, c := range s.Doc.Coefficients {
		if math.IsNaN(c) || math.IsInf(c, 0) {
			t.Errorf("coefficient %s = %v", k, c)
		}
	}
}
