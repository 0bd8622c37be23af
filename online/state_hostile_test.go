package online

import (
	"bytes"
	"errors"
	"fmt"
	"testing"
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
		var e encoder
		e.header(stateLadder)
		e.str("squared")
		e.f(1)
		e.int(features)
		e.int(window)
		e.int64(0)
		e.int(size)
		e.f(1e-3)
		e.f(0)
		e.int(2)
		e.u64(1)
		e.str(learner)
		e.f(100)
		e.uint(0)
		e.f(0)
		e.f(0)
		return e.b
	}
	holdout := func(features, capacity, head, n int) []byte {
		var e encoder
		e.header(stateHoldout)
		e.int(features)
		e.int(capacity)
		e.int(head)
		e.int(n)
		e.str("")
		return e.b
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
