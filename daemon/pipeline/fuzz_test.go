package pipeline

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
)

// FuzzPipeline drives one model's whole path the way the daemon's worker
// does (the wire decoder → Pipeline.Apply → Publish and Document → the
// store's JSON and the PMML writer) with records the fuzzer writes, one per
// line of data, on a model warmed up with good records; with the high bit of
// mode set, data is not JSON but spells records from tables of hostile parts
// (spell), which reaches the pipeline far more often than mutated JSON.
// mode picks the model configuration (fuzzModels). Invariants:
//
//   - nothing panics;
//   - a record the decoder or the pipeline rejects has a reason token and
//     leaves the pipeline's whole state (MarshalBinary) bit-unchanged;
//   - every document Publish or Document returns encodes to valid JSON whose
//     numbers are all finite, its feature names are valid channel names
//     (record.ValidName), the store takes it and the PMML writer writes
//     well-formed XML for it;
//   - publication never stops for good: after the fuzzer's records, a run
//     of good records (fuzzRecovery) leads to a new published version and
//     a forced publication succeeds.
//
// The seed corpus is in testdata/fuzz/FuzzPipeline (the hostile kinds:
// empty, huge and surrogate names, 1e308, NaN, deep nesting, duplicate keys,
// far-future times, floods of names, ...). `go test` runs the seeds;
// `go test -run '^$' -fuzz '^FuzzPipeline$' ./daemon/pipeline/` explores.
func FuzzPipeline(f *testing.F) {
	models := fuzzModels(f)
	warm := make([]*fuzzWarm, len(models))
	g := rand.New(rand.NewPCG(3, 4))
	for i := range 8 {
		var b []byte
		for j := range 4 {
			b = fmt.Appendf(b, `{"y":%d,"x":{"a":%.3f,"b":%.3f,"n%d":%.3f}}`+"\n", (i+j)%2, g.NormFloat64(), g.NormFloat64(), j, g.NormFloat64())
		}
		f.Add(uint8(i), b)
		spelled := make([]byte, 64)
		for j := range spelled {
			spelled[j] = byte(g.IntN(256))
		}
		f.Add(uint8(0x80|i), spelled)
	}
	f.Fuzz(func(t *testing.T, mode uint8, data []byte) {
		i := int(mode) % len(models)
		if testing.Short() && i >= 2 {
			// -short (the race run of the README command): the seeds of the
			// first two models only; go test without -short runs them all.
			t.Skip("-short: seeds of the lin and logit models only")
		}
		if warm[i] == nil { // one warm-up per model, restored for every input
			warm[i] = warmUp(t, &models[i])
		}
		fz := warm[i].run(t)
		if mode&0x80 != 0 { // data spells records from tables of hostile parts
			for n, msg := 0, []byte(nil); len(data) > 0 && n < fuzzMaxRecords; n++ {
				msg, data = spell(msg[:0], data)
				fz.hostile(msg)
			}
		} else { // data is records, one per line
			for n, line := range bytes.Split(data, []byte{'\n'}) {
				if n == fuzzMaxRecords {
					break
				}
				fz.hostile(line)
			}
		}
		fz.recover()
	})
}

// Parts of the records spell writes: names, values, labels, weights and
// times, from the ordinary to the hostile (empty, control, lone surrogate
// and over-long names; values at and past every limit; numbers as strings,
// booleans, null; far-future and far-past times).
var (
	spellNames = []string{`a`, `b`, `c`, `d`, `e`, `f`, `g`, `h`, `i`, ``, `\u0001`, `\ud800`, `\udc00x`, `\ud83d\ude00`,
		`a\u0000`, strings.Repeat("n", 300), strings.Repeat("m", 256), `y`, `x`, `\"`}
	spellValues = []string{`0`, `1`, `-1`, `0.5`, `-0`, `1e29`, `-1e29`, `1e50`, `1e60`, `1e308`, `-1e308`, `5e-324`, `1e-300`,
		`1e400`, `null`, `"1"`, `true`, `123456789012345678901234567890`, `[1]`, `{}`}
	spellLabels  = []string{`0`, `1`, `2`, `-1`, `0.5`, `1e40`, `1e308`, `-1e308`, `true`, `false`, `null`, `"1"`, `1e400`}
	spellWeights = []string{`1`, `0`, `-1`, `0.5`, `1e308`, `5e-324`, `1e-300`, `"1"`, `null`, `1e50`}
	spellTimes   = []string{`0`, `-1`, `1772600000000`, `253402300799999`, `-9223372036854775808`, `"9999-12-31T23:59:59Z"`,
		`"2026-03-04T05:06:07Z"`, `"2026-03-04T05:16:07Z"`, `"0001-01-01T00:00:00Z"`, `"yesterday"`, `null`}
)

// spell appends to msg one record spelled by the leading bytes of data and
// returns it with the rest of data: a byte of flags (label, weight, time,
// the "v" form), the number of channels, then a name and a value byte per
// channel, then the label, weight and time bytes that the flags ask for.
func spell(msg, data []byte) ([]byte, []byte) {
	next := func() int {
		if len(data) == 0 {
			return 0
		}
		b := data[0]
		data = data[1:]
		return int(b)
	}
	flags, n := next(), next()%8
	msg = append(msg, '{')
	if flags&8 != 0 {
		msg = append(msg, `"v":[`...)
		for j := range n {
			if j > 0 {
				msg = append(msg, ',')
			}
			msg = append(msg, spellValues[next()%len(spellValues)]...)
		}
		msg = append(msg, ']')
	} else {
		msg = append(msg, `"x":{`...)
		for j := range n {
			if j > 0 {
				msg = append(msg, ',')
			}
			msg = append(msg, '"')
			msg = append(msg, spellNames[next()%len(spellNames)]...)
			msg = append(msg, `":`...)
			msg = append(msg, spellValues[next()%len(spellValues)]...)
		}
		msg = append(msg, '}')
	}
	if flags&1 == 0 {
		msg = append(msg, `,"y":`...)
		msg = append(msg, spellLabels[next()%len(spellLabels)]...)
	}
	if flags&2 != 0 {
		msg = append(msg, `,"w":`...)
		msg = append(msg, spellWeights[next()%len(spellWeights)]...)
	}
	if flags&4 != 0 {
		msg = append(msg, `,"t":`...)
		msg = append(msg, spellTimes[next()%len(spellTimes)]...)
	}
	return append(msg, '}'), data
}

// fuzzMaxRecords bounds the records of one fuzz input.
const fuzzMaxRecords = 32

// fuzzWindow is the train window of the fuzz models: small, so a short run
// of good records replaces every record the fuzzer sent.
const fuzzWindow = 20

// fuzzRecovery is the run of good records after the fuzzer's: with every
// 5th held out, 64 go to the train window (three windows) and 16 to the
// held-out ring of 10.
const fuzzRecovery = 80

// fuzzModels returns the validated model configurations the fuzz target
// picks from: squared and logistic, learned and fixed features, impute and
// reject, a time-span window, the decay learner, elastic net.
func fuzzModels(tb testing.TB) []config.Model {
	base := func(name, loss string) config.Model {
		m := config.DefaultModel()
		m.Name, m.Subject, m.Loss = name, "fuzz."+name, loss
		m.MaxFeatures = 8
		m.Window.Records = fuzzWindow
		m.Holdout.Records = 10
		m.Retune.Every = 10
		m.Ladder.Size = 4
		m.Drift.Cooldown = 0
		return m
	}
	lin := base("lin", config.LossSquared)
	logit := base("logit", config.LossLogistic)
	fixed := base("fixed", config.LossSquared)
	fixed.Features = []string{"a", "b"}
	strict := base("strict", config.LossLogistic)
	strict.Features = []string{"a", "b"}
	strict.Missing = config.MissingReject
	span := base("span", config.LossSquared)
	span.Window.Span = config.Duration(time.Minute)
	decay := base("decay", config.LossLogistic)
	decay.Learner.Kind = config.LearnerDecay
	decay.Learner.HalfLife = fuzzWindow
	enet := base("enet", config.LossSquared)
	enet.Penalty, enet.Mix = config.PenaltyElasticNet, 0.5
	enet.Drift.Performance = config.DriftPageHinkley
	ms := []config.Model{lin, logit, fixed, strict, span, decay, enet}
	for i := range ms {
		cfg := config.Default()
		cfg.DataDir = tb.TempDir()
		cfg.Models = []config.Model{ms[i]}
		if err := cfg.Validate(); err != nil {
			tb.Fatalf("fuzz model %s: %v", ms[i].Name, err)
		}
		ms[i] = cfg.Models[0]
	}
	return ms
}

// fuzzRun is one model's pipeline with its decoder and store, driven as
// the daemon's worker drives it.
type fuzzRun struct {
	t        *testing.T
	m        *config.Model
	p        *Pipeline
	dec      *record.Decoder
	store    *sink.Store
	rec      record.Record
	now      time.Time
	rejected uint64
	rng      *rand.Rand
	msg      []byte
}

// fuzzWarm is a model's pipeline after the warm-up, saved: every fuzz
// input starts from it, restored bit for bit (a warm-up per input would
// cost more than the input).
type fuzzWarm struct {
	m     *config.Model
	state []byte
	names []string
	now   time.Time
}

// warmUp feeds m's fresh pipeline good records until it has published a
// version, and saves it.
func warmUp(t *testing.T, m *config.Model) *fuzzWarm {
	p, err := New(Options{Model: m})
	if err != nil {
		t.Fatal(err)
	}
	fz := newFuzzRun(t, m, p, nil, time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC))
	for range 2 * fuzzWindow {
		fz.good()
	}
	if p.Version() == 0 {
		t.Fatal("no version published after the warm-up")
	}
	b, err := p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	return &fuzzWarm{m: m, state: b, names: slices.Clone(fz.dec.Names()), now: fz.now}
}

// run returns a fuzz run on a restored copy of the warm pipeline.
func (w *fuzzWarm) run(t *testing.T) *fuzzRun {
	p, err := Restore(Options{Model: w.m}, w.state)
	if err != nil {
		t.Fatal(err)
	}
	return newFuzzRun(t, w.m, p, w.names, w.now)
}

// newFuzzRun returns a run on p, whose decoder knows names.
func newFuzzRun(t *testing.T, m *config.Model, p *Pipeline, names []string, now time.Time) *fuzzRun {
	fz := &fuzzRun{
		t: t, m: m, p: p,
		dec: record.NewDecoder(&record.DecoderOptions{
			Features:    m.Features,
			Learned:     names[min(len(m.Features), len(names)):],
			MaxFeatures: p.Width(),
			Logistic:    m.Logistic(),
			Missing:     m.Missing,
		}),
		store: sink.NewStore(),
		rec:   record.Record{X: make([]float64, 0, p.Width())},
		now:   now,
		rng:   rand.New(rand.NewPCG(1, 2)),
	}
	fz.store.Register(m.Name)
	return fz
}

// good applies one good record: a linear signal in a and b plus noise, a
// value for every other name the decoder knows, no time.
func (fz *fuzzRun) good() {
	a, b := fz.rng.NormFloat64(), fz.rng.NormFloat64()
	eta := 1 + 2*a - b + 0.3*fz.rng.NormFloat64()
	y := eta
	if fz.m.Logistic() {
		y = 0
		if fz.rng.Float64() < 1/(1+math.Exp(-eta)) {
			y = 1
		}
	}
	msg := fmt.Appendf(fz.msg[:0], `{"y":%g,"x":{"a":%g,"b":%g`, y, a, b)
	for _, name := range fz.dec.Names() {
		if name != "a" && name != "b" {
			q, _ := json.Marshal(name)
			msg = fmt.Appendf(msg, `,%s:%g`, q, fz.rng.NormFloat64())
		}
	}
	fz.msg = append(msg, "}}"...)
	if err := fz.apply(fz.msg, false); err != nil {
		fz.t.Fatalf("good record %s rejected: %v", fz.msg, err)
	}
}

// hostile applies one record of the fuzzer's; a rejection is fine.
func (fz *fuzzRun) hostile(msg []byte) { _ = fz.apply(msg, true) }

// apply decodes msg, applies it and publishes as the worker does. hostile
// checks every invariant: the state is unchanged by a rejection, and both
// the published and the current document (Document) are sound; for a good
// record the store must take what is published (as for the worker). It
// returns the rejection, if any.
func (fz *fuzzRun) apply(msg []byte, hostile bool) error {
	t := fz.t
	fz.now = fz.now.Add(1500 * time.Millisecond)
	if err := fz.dec.Decode(msg, &fz.rec); err != nil {
		fz.checkReason(err, msg)
		fz.rejected++
		return err
	}
	var before []byte
	if hostile {
		var err error
		if before, err = fz.p.MarshalBinary(); err != nil {
			t.Fatalf("state before %q: %v", msg, err)
		}
	}
	if _, err := fz.p.Apply(&fz.rec, fz.dec.Names(), fz.now); err != nil {
		fz.checkReason(err, msg)
		if hostile {
			after, err2 := fz.p.MarshalBinary()
			if err2 != nil {
				t.Fatalf("state after rejecting %q: %v", msg, err2)
			}
			if !bytes.Equal(before, after) {
				t.Fatalf("rejecting %q (%v) changed the pipeline's state", msg, err)
			}
		}
		fz.rejected++
		return err
	}
	s, err := fz.p.Publish(fz.now, fz.rejected, false)
	switch {
	case err != nil || s == nil:
	case hostile:
		fz.checkSnapshot(s, msg)
	default:
		if err := fz.store.SetModel(s.Doc); err != nil {
			t.Fatalf("the store refuses version %d: %v", s.Doc.Version, err)
		}
	}
	if !hostile {
		return nil
	}
	if s, err := fz.p.Document(fz.now, fz.rejected); err == nil && s != nil {
		fz.checkSnapshot(s, msg)
	}
	return nil
}

// checkReason checks that a rejection carries a reason token.
func (fz *fuzzRun) checkReason(err error, msg []byte) {
	var re *record.Error
	if !errors.As(err, &re) || re.Reason == "" || !slices.Contains(record.Reasons(), re.Reason) {
		fz.t.Fatalf("rejection of %q without a known reason: %v", msg, err)
	}
}

// checkSnapshot checks a published or current document after msg.
func (fz *fuzzRun) checkSnapshot(s *Snapshot, msg []byte) {
	t := fz.t
	for _, name := range s.Names {
		if why := record.ValidName([]byte(name)); why != "" && !slices.Contains(fz.m.Features, name) {
			t.Fatalf("after %q: the document names feature %q, which %s", msg, name, why)
		}
	}
	b, err := json.Marshal(s.Doc)
	if err != nil {
		t.Fatalf("after %q: the document does not encode: %v", msg, err)
	}
	if err := finiteJSON(b); err != nil {
		t.Fatalf("after %q: %v in %s", msg, err, b)
	}
	m := s.Model
	for _, v := range [][]float64{m.Coef, m.Standardized, m.Mean, m.Std, {m.Intercept}} {
		for _, x := range v {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				t.Fatalf("after %q: non-finite value in the served model: %+v", msg, m)
			}
		}
	}
	if err := fz.store.SetModel(s.Doc); err != nil {
		t.Fatalf("after %q: the store refuses the document: %v", msg, err)
	}
	x, err := sink.PMML(s.Doc)
	if err != nil {
		t.Fatalf("after %q: no PMML: %v", msg, err)
	}
	d := xml.NewDecoder(bytes.NewReader(x))
	for {
		if _, err := d.Token(); err == io.EOF {
			break
		} else if err != nil {
			t.Fatalf("after %q: PMML is not well-formed XML: %v", msg, err)
		}
	}
}

// finiteJSON checks that b is one valid JSON value whose numbers are all
// finite float64 values.
func finiteJSON(b []byte) error {
	if !json.Valid(b) {
		return errors.New("invalid JSON")
	}
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	var v any
	if err := d.Decode(&v); err != nil {
		return err
	}
	var walk func(v any) error
	walk = func(v any) error {
		switch v := v.(type) {
		case json.Number:
			f, err := v.Float64()
			if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
				return fmt.Errorf("number %s is not a finite float64", v)
			}
		case []any:
			for _, e := range v {
				if err := walk(e); err != nil {
					return err
				}
			}
		case map[string]any:
			for _, e := range v {
				if err := walk(e); err != nil {
					return err
				}
			}
		}
		return nil
	}
	return walk(v)
}

// recover feeds fuzzRecovery good records, publishing after each as
// the worker's tick does, and requires a new version and a forced
// publication that succeeds.
func (fz *fuzzRun) recover() {
	t := fz.t
	v0 := fz.p.Version()
	for range fuzzRecovery {
		fz.good()
	}
	fz.now = fz.now.Add(time.Second)
	s, err := fz.p.Publish(fz.now, fz.rejected, true)
	if err != nil || s == nil {
		t.Fatalf("forced publication after %d good records: %v, %v", fuzzRecovery, s, err)
	}
	fz.checkSnapshot(s, nil)
	if fz.p.Version() <= v0+1 {
		t.Fatalf("no version published by %d good records (version %d before them, %d after the forced one)", fuzzRecovery, v0, fz.p.Version())
	}
}
