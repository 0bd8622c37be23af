package online

import (
	"bytes"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	wnd "lariat/window"
)

// smallLadder returns the encoding of a small ladder whose window has
// wrapped.
func smallLadder(t testing.TB, learner string, lambda float64) []byte {
	c := stateCase{opt: Options{Features: 2, Window: 8, Size: 3, Learner: learner, Lambda: lambda, Seed: 1}, nan: true}
	l, err := NewLadder(&c.opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range c.records(13) {
		if err := l.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	return must(l.MarshalBinary())
}

// TestStateHostile checks that truncated, extended, re-versioned and
// retyped encodings are refused with ErrState and never panic.
func TestStateHostile(t *testing.T) {
	h := NewHoldout(2, 4)
	for _, r := range (stateCase{opt: Options{Features: 2}}).records(6) {
		_ = h.Add(r)
	}
	c := Chooser{Rule: RuleOneSE}
	c.Update([]Score{{Lambda: 1, Loss: 1}, {Lambda: 0.5, Loss: 0.5}})
	restorers := map[byte]func([]byte) error{
		stateLadder:  func(b []byte) error { _, err := UnmarshalLadder(b); return err },
		stateHoldout: func(b []byte) error { var h Holdout; return h.UnmarshalBinary(b) },
		stateChooser: func(b []byte) error { var c Chooser; return c.UnmarshalBinary(b) },
	}
	for _, tc := range []struct {
		name string
		b    []byte
	}{
		{"ladder/saga/K3", smallLadder(t, "saga", 0)},
		{"ladder/saga/K1", smallLadder(t, "saga", 0.1)},
		{"ladder/decay/K3", smallLadder(t, "decay", 0)},
		{"ladder/gram/K3", smallLadder(t, "gram", 0)},
		{"holdout", must(h.MarshalBinary())},
		{"chooser", must(c.MarshalBinary())},
	} {
		t.Run(tc.name, func(t *testing.T) {
			un := restorers[tc.b[1]]
			refused := func(what string, b []byte) {
				t.Helper()
				if err := un(b); !errors.Is(err, ErrState) {
					t.Fatalf("%s: err = %v, want ErrState", what, err)
				}
			}
			if err := un(tc.b); err != nil {
				t.Fatal(err)
			}
			for i := range len(tc.b) {
				refused(fmt.Sprintf("prefix %d of %d", i, len(tc.b)), tc.b[:i])
			}
			refused("byte appended", append(bytes.Clone(tc.b), 0))
			bad := bytes.Clone(tc.b)
			bad[0] = stateVersion + 1
			refused("version", bad)
			bad[0], bad[1] = stateVersion, 'X'
			refused("type", bad)
		})
	}
}

// TestStateInconsistent checks hand-made encodings whose sizes do not fit.
func TestStateInconsistent(t *testing.T) {
	ladder := func(window, features, size int, learner string) []byte {
		e := wnd.NewEncoder(nil)
		putHeader(e, stateLadder)
		putString(e, "squared")
		e.PutFloat64(1)
		e.PutUvarint(uint64(features))
		e.PutUvarint(uint64(window))
		e.PutVarint(0)
		e.PutUvarint(uint64(size))
		e.PutFloat64(1e-3)
		e.PutFloat64(0)
		e.PutUvarint(2)
		e.PutUvarint(1)
		putString(e, learner)
		e.PutFloat64(100)
		e.PutUvarint(0)
		e.PutFloat64(0)
		e.PutFloat64(0)
		return e.Bytes()
	}
	holdout := func(features, capacity, head, n int) []byte {
		e := wnd.NewEncoder(nil)
		putHeader(e, stateHoldout)
		e.PutUvarint(uint64(features))
		e.PutUvarint(uint64(capacity))
		e.PutUvarint(uint64(head))
		e.PutUvarint(uint64(n))
		putString(e, "")
		return e.Bytes()
	}
	for _, tc := range []struct {
		name string
		b    []byte
	}{
		{"ladder window above 1e8", ladder(100_000_001, 2, 1, "saga")},
		{"ladder buffers too large", ladder(10_000_000, 1000, 12, "saga")},
		{"ladder members missing", ladder(10, 4, 12, "saga")},
		{"ladder zero features", ladder(10, 0, 1, "saga")},
		{"ladder unknown learner", ladder(10, 2, 1, "sgd")},
		{"holdout capacity above 1e8", holdout(1, 100_000_001, 0, 0)},
		{"holdout buffers too large", holdout(1000, 10_000_000, 0, 0)},
		{"holdout head beyond capacity", holdout(2, 4, 4, 0)},
		{"holdout more records than capacity", holdout(2, 4, 0, 5)},
		{"holdout records missing", holdout(2, 4, 0, 3)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var err error
			if tc.b[1] == stateLadder {
				_, err = UnmarshalLadder(tc.b)
			} else {
				var h Holdout
				err = h.UnmarshalBinary(tc.b)
			}
			if !errors.Is(err, ErrState) {
				t.Fatalf("err = %v, want ErrState", err)
			}
		})
	}
}

// FuzzLadderState feeds arbitrary bytes to the restorers: none may panic,
// and a ladder that restores must then take records and report.
func FuzzLadderState(f *testing.F) {
	f.Add(smallLadder(f, "saga", 0))
	f.Add(smallLadder(f, "decay", 0))
	f.Add(smallLadder(f, "saga", 0.1))
	f.Add(smallLadder(f, "gram", 0))
	// Keep each input's allocation small, so that the fuzzer runs fast.
	defer func(v int) { stateWordLimit = v }(stateWordLimit)
	stateWordLimit = 1 << 20
	f.Fuzz(func(t *testing.T, b []byte) {
		var h Holdout
		_ = h.UnmarshalBinary(b)
		var c Chooser
		_ = c.UnmarshalBinary(b)
		l, err := UnmarshalLadder(b)
		if err != nil {
			if !errors.Is(err, ErrState) {
				t.Fatalf("err = %v, want ErrState", err)
			}
			return
		}
		x := make([]float64, l.Features())
		_ = l.Add(Record{X: x})
		l.Idle(2)
		for i := range l.Size() {
			l.Model(i)
			l.KKT(i)
		}
	})
}

var updateSeeds = flag.Bool("update-seeds", false, "rewrite the committed seeds of FuzzLadderState in testdata/fuzz")

// fuzzSeeds returns the committed seeds of FuzzLadderState by file name:
// valid encodings of small ladders (SAGA with a wrapped window, with a
// fixed λ and with a span that evicted records; decay; gram), of a holdout that
// has wrapped and holds missing features, and of a chooser.
func fuzzSeeds(t testing.TB) map[string][]byte {
	span := stateCase{opt: Options{Features: 3, Window: 5, Span: 3 * time.Second, Size: 2, Seed: 4}, timed: true}
	l, err := NewLadder(&span.opt)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range span.records(9) {
		if i == 6 { // a gap in time: the span evicts two records at once
			continue
		}
		if err := l.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	h := NewHoldout(2, 4)
	for _, r := range (stateCase{opt: Options{Features: 2}, nan: true}).records(6) {
		if err := h.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	c := Chooser{Rule: RuleOneSE}
	c.Update([]Score{{Lambda: 1, Loss: 1}, {Lambda: 0.5, Loss: 0.5}})
	grown := stateCase{opt: Options{Features: 2, MaxFeatures: 5, Window: 4, Size: 2, Seed: 6}, nan: true}
	g, err := NewLadder(&grown.opt)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range grown.records(9) {
		if i == 4 {
			g.Grow(4)
			g.ResetFeature(1)
		}
		if i >= 4 {
			r.X = append(r.X, float64(i), math.NaN())
		}
		if err := g.Add(r); err != nil {
			t.Fatal(err)
		}
	}
	return map[string][]byte{
		"saga_grown":        must(g.MarshalBinary()),
		"saga_wrapped":      smallLadder(t, "saga", 0),
		"saga_fixed_lambda": smallLadder(t, "saga", 0.1),
		"saga_span":         must(l.MarshalBinary()),
		"decay":             smallLadder(t, "decay", 0),
		"gram":              smallLadder(t, "gram", 0),
		"holdout":           must(h.MarshalBinary()),
		"chooser":           must(c.MarshalBinary()),
	}
}

// TestFuzzSeeds checks that every committed seed of FuzzLadderState is a
// valid encoding, so that the fuzzer starts from states that restore
// (the seeds themselves may differ in their last bits from what this
// machine computes, see the kernels). With -update-seeds it first rewrites
// them from fuzzSeeds.
func TestFuzzSeeds(t *testing.T) {
	dir := filepath.Join("testdata", "fuzz", "FuzzLadderState")
	if *updateSeeds {
		for name, b := range fuzzSeeds(t) {
			data := "go test fuzz v1\n[]byte(" + strconv.Quote(string(b)) + ")\n"
			if err := os.WriteFile(filepath.Join(dir, name), []byte(data), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	files, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	seen := map[string]bool{}
	for _, f := range files {
		raw, err := os.ReadFile(filepath.Join(dir, f.Name()))
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(raw)), "\n")
		if len(lines) != 2 || lines[0] != "go test fuzz v1" ||
			!strings.HasPrefix(lines[1], "[]byte(") || !strings.HasSuffix(lines[1], ")") {
			t.Fatalf("%s: not a seed of one []byte", f.Name())
		}
		s, err := strconv.Unquote(strings.TrimSuffix(strings.TrimPrefix(lines[1], "[]byte("), ")"))
		if err != nil || len(s) < 2 {
			t.Fatalf("%s: %q: %v", f.Name(), lines[1], err)
		}
		b := []byte(s)
		switch b[1] {
		case stateLadder:
			_, err = UnmarshalLadder(b)
		case stateHoldout:
			var h Holdout
			err = h.UnmarshalBinary(b)
		case stateChooser:
			var c Chooser
			err = c.UnmarshalBinary(b)
		default:
			err = fmt.Errorf("type byte %q", b[1])
		}
		if err != nil {
			t.Errorf("%s: %v", f.Name(), err)
		}
		seen[f.Name()] = true
	}
	for name := range fuzzSeeds(t) {
		if !seen[name] {
			t.Errorf("seed %s missing", name)
		}
	}
}
