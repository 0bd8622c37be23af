package pipeline

import (
	"bytes"
	"encoding/json"
	"errors"
	"math/rand/v2"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink"
)

// TestStateContinues saves a pipeline mid-stream, restores it, and feeds
// both the same continuation: every ladder member, the held-out ring, the
// choice of λ, the drift watch's alerts and counts, the threshold and the
// published documents must stay bit-identical, and re-saving the restored
// pipeline must give the same bytes. The streams cross retunes, a drift
// adaptation (an abrupt SEA concept change, Street & Kim 2001) and data
// drift, so every piece of the watch's state is exercised.
func TestStateContinues(t *testing.T) {
	cases := []struct {
		name     string
		loss     string
		perf     string
		wantPerf bool // the change is large enough for this detector (measured)
	}{
		{"logistic/adwin", config.LossLogistic, config.DriftADWIN, true},
		{"logistic/page-hinkley", config.LossLogistic, config.DriftPageHinkley, false},
		{"squared/adwin", config.LossSquared, config.DriftADWIN, true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := driftModel("state", tc.loss, []string{"f1", "f2", "f3"}, 1200)
			m.Drift.Performance = tc.perf
			m.Drift.Cooldown = config.Duration(time.Hour)
			if tc.loss == config.LossLogistic {
				m.Threshold = config.Threshold{Mode: config.ThresholdFPR, Value: 0.5, Target: 0.1}
			}
			a := newHarness(t, m)
			s := newSEA(9, 8, 0)
			x := make([]float64, 3)
			shift := 0.0 // added to the irrelevant third feature: data drift
			next := func() float64 {
				y := s.next(x)
				if tc.loss == config.LossSquared {
					y = x[0] + x[1] - 2*s.theta
				}
				x[2] += shift
				return y
			}
			for range 3000 {
				a.feed(x, next())
			}
			a.publish()
			state, err := a.p.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			b := newHarness(t, m)
			b.p, err = Restore(Options{Model: a.p.cfg}, state)
			if err != nil {
				t.Fatal(err)
			}
			b.now = a.now
			again, err := b.p.MarshalBinary()
			if err != nil || !bytes.Equal(again, state) {
				t.Fatalf("re-saved state differs (%d vs %d bytes, %v)", len(again), len(state), err)
			}
			s.theta = 9.5 // an abrupt change after the restore
			for i := range 4000 {
				if i == 2000 {
					shift = 3
				}
				y := next()
				a.feed(x, y)
				b.feed(x, y)
				if i%500 == 499 {
					sa, sb := a.publish(), b.publish()
					if (sa == nil) != (sb == nil) || sa != nil && !sameDoc(sa.Doc, sb.Doc) {
						t.Fatalf("record %d: published documents differ", i)
					}
				}
			}
			if ladderBits(a.p.ladder) != ladderBits(b.p.ladder) {
				t.Error("ladders differ after the continuation")
			}
			ca, cb := a.p.DriftCounts(), b.p.DriftCounts()
			if ca != cb || ca.Data.Detected == 0 || tc.wantPerf && ca.Performance.Detected == 0 {
				t.Errorf("drift counts %+v and %+v (want equal, with data drift and, for %s, a performance detection)", ca, cb, tc.perf)
			}
			if pa, pb := a.p.Current(), b.p.Current(); pa != pb {
				t.Errorf("chosen member %d and %d", pa, pb)
			}
			sa, _ := a.p.MarshalBinary()
			sb, _ := b.p.MarshalBinary()
			if !bytes.Equal(sa, sb) {
				t.Error("final states differ")
			}
		})
	}
}

// sameDoc compares two model documents, their time of publication aside.
func sameDoc(a, b *sink.ModelDoc) bool {
	x, y := *a, *b
	x.Updated, y.Updated = time.Time{}, time.Time{}
	ja, _ := json.Marshal(x)
	jb, _ := json.Marshal(y)
	return bytes.Equal(ja, jb)
}

// TestStateRefused: every truncation of a valid state, a byte appended, a
// state of another model and one made under another learning configuration
// are refused with ErrState, never a panic.
func TestStateRefused(t *testing.T) {
	m := driftModel("refused", config.LossLogistic, []string{"f1", "f2", "f3"}, 300)
	h := newHarness(t, m)
	s := newSEA(3, 8, 0.1)
	x := make([]float64, 3)
	for range 900 {
		h.feed(x, s.next(x))
	}
	state, err := h.p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	for n := 0; n < len(state); n += 1 + rand.IntN(max(1, len(state)/500)) {
		if _, err := Restore(Options{Model: h.p.cfg}, state[:n]); !errors.Is(err, ErrState) {
			t.Fatalf("a state cut to %d of %d bytes: %v", n, len(state), err)
		}
	}
	if _, err := Restore(Options{Model: h.p.cfg}, append(bytes.Clone(state), 0)); !errors.Is(err, ErrState) {
		t.Errorf("a byte appended: %v", err)
	}
	other := *h.p.cfg
	other.Name = "another"
	if _, err := Restore(Options{Model: &other}, state); !errors.Is(err, ErrState) {
		t.Errorf("another model: %v", err)
	}
	changed := *h.p.cfg
	changed.Window.Records = 400
	if _, err := Restore(Options{Model: &changed}, state); !errors.Is(err, ErrState) {
		t.Errorf("another window: %v", err)
	}
	relaxed := *h.p.cfg
	relaxed.Publish.Tolerance = 0.5 // publication settings may change
	if _, err := Restore(Options{Model: &relaxed}, state); err != nil {
		t.Errorf("another publish tolerance: %v", err)
	}
}

// FuzzRestore: no input makes Restore panic; an accepted one re-saves.
func FuzzRestore(f *testing.F) {
	m := driftModel("fuzz", config.LossLogistic, []string{"f1", "f2"}, 50)
	m.Holdout.Records = 20
	m.Retune.Every = 20
	h := newHarness(f, m)
	s := newSEA(1, 8, 0.1)
	x := make([]float64, 3)
	for range 200 {
		y := s.next(x)
		h.feed(x[:2], y)
	}
	state, err := h.p.MarshalBinary()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(state)
	f.Add(state[:len(state)/2])
	f.Fuzz(func(t *testing.T, b []byte) {
		p, err := Restore(Options{Model: h.p.cfg}, b)
		if err != nil {
			return
		}
		if _, err := p.MarshalBinary(); err != nil {
			t.Fatalf("restored but cannot re-save: %v", err)
		}
	})
}

// BenchmarkPipelineState saves and restores a pipeline with the daemon's
// default settings and a full window: 10,000 train records, d = 64, K = 12,
// a held-out ring of 2,000 (the configuration a user gets by default), and
// reports the state's size. The baseline in the same run is copying the
// state's bytes once (the least any restore must do).
func BenchmarkPipelineState(b *testing.B) {
	m := config.DefaultModel()
	m.Name, m.Subject = "bench", "bench"
	m.Features, m.MaxFeatures = featureNames(64), 64
	h := newHarness(b, m)
	s := &sparseStream{rng: rand.New(rand.NewPCG(1, 2))}
	x := make([]float64, 64)
	for range 13000 {
		h.feed(x, s.next(x))
	}
	state, err := h.p.MarshalBinary()
	if err != nil {
		b.Fatal(err)
	}
	b.Run("marshal", func(b *testing.B) {
		for b.Loop() {
			if _, err := h.p.MarshalBinary(); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(float64(len(state)), "state-bytes")
	})
	b.Run("restore", func(b *testing.B) {
		for b.Loop() {
			if _, err := Restore(Options{Model: h.p.cfg}, state); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("copy-baseline", func(b *testing.B) {
		for b.Loop() {
			_ = bytes.Clone(state)
		}
	})
}

// TestStateWaitingCut saves a pipeline while a drift adaptation waits for
// its 50 train records after the estimated change point (the linear
// stream of TestWatchPerformanceAlert, whose cut waits), restores it, and
// feeds both the same continuation: the cut must happen at the same record
// with the same window sizes, and every later ladder, choice and state
// must be bit-identical. A damaged waiting cut (train + held-out counts
// that do not add up) is refused with ErrState.
func TestStateWaitingCut(t *testing.T) {
	m := driftModel("wait", config.LossSquared, featureNames(3), 2000)
	a := newHarness(t, m)
	s := &switchStream{rng: rand.New(rand.NewPCG(6, 6)), k: 0}
	x := make([]float64, 3)
	for range 4000 {
		a.feed(x, s.next(x))
	}
	s.k = 1
	for i := 0; !a.watch().cut.on; i++ {
		if i == 600 {
			t.Fatal("no waiting cut within 600 records of the change")
		}
		a.feed(x, s.next(x))
	}
	state, err := a.p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	b := newHarness(t, m)
	if b.p, err = Restore(Options{Model: a.p.cfg}, state); err != nil {
		t.Fatal(err)
	}
	if again, _ := b.p.MarshalBinary(); !bytes.Equal(again, state) {
		t.Fatal("re-saved state differs")
	}
	saved := a.watch().cut
	t.Logf("saved with a cut waiting: %+v", saved)
	cutA, cutB := -1, -1
	for i := range 1500 {
		y := s.next(x)
		a.feed(x, y)
		b.feed(x, y)
		if a.p.step.Adapted && cutA < 0 {
			cutA = i
		}
		if b.p.step.Adapted && cutB < 0 {
			cutB = i
			if a.p.ladder.Len() != b.p.ladder.Len() || a.p.HeldOutLen() != b.p.HeldOutLen() {
				t.Errorf("windows after the cut %d/%d and %d/%d", a.p.ladder.Len(), a.p.HeldOutLen(), b.p.ladder.Len(), b.p.HeldOutLen())
			}
		}
	}
	if cutA < 0 || cutA != cutB {
		t.Errorf("cut at record %d of the original, %d of the restored", cutA, cutB)
	}
	if ladderBits(a.p.ladder) != ladderBits(b.p.ladder) || a.p.Current() != b.p.Current() {
		t.Error("ladders or choices differ after the continuation")
	}
	sa, _ := a.p.MarshalBinary()
	sb, _ := b.p.MarshalBinary()
	if !bytes.Equal(sa, sb) {
		t.Error("final states differ")
	}
	// The waiting cut ends the watch's state (on, post, train, held: small
	// counts, one zig-zag byte each), followed by the one byte that says
	// the squared-loss model has no threshold tuner.
	bad := bytes.Clone(state)
	if bad[len(bad)-2] != byte(2*saved.held) {
		t.Fatalf("state layout: byte %d before the end, want the held-out count %d", bad[len(bad)-2], saved.held)
	}
	bad[len(bad)-2] += 2 // held + 1: train + held no longer equals post
	if _, err := Restore(Options{Model: a.p.cfg}, bad); !errors.Is(err, ErrState) {
		t.Errorf("a waiting cut whose counts do not add up: %v", err)
	}
}
