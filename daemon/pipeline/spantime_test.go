package pipeline

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
)

// TestSpanWindowTime checks that a time-span window never evicts on a
// record time it cannot trust. A far-future time is the daemon's to refuse
// (time_skew, reason time; TestRejects); what reaches the pipeline may be
// far in the past, out of order, or absent, and none of these may evict a
// record that a well-timed stream would keep, or leave the window in a
// state that differs from the same stream without the odd record except
// for that one record (window 1 min, 3000 records 10 ms apart).
func TestSpanWindowTime(t *testing.T) {
	t0 := time.Date(2026, 3, 4, 5, 0, 0, 0, time.UTC).UnixMilli()
	cases := []struct {
		name string
		t    int64 // the odd record's time; 0 = none
		has  bool
	}{
		{"far past (year 2000)", time.Date(2000, 1, 1, 0, 0, 0, 0, time.UTC).UnixMilli(), true},
		{"Unix epoch + 1 ms", 1, true},
		{"out of order by 20 s", t0 + 30_000 - 20_000, true},
		{"out of order by 2 min (before the span)", t0 + 30_000 - 120_000, true},
		{"no time", 0, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := config.DefaultModel()
			m.Name, m.Subject = "span", "test.span"
			m.Features, m.MaxFeatures = []string{"a", "b"}, 2
			m.Window.Records, m.Window.Span = 5000, config.Duration(time.Minute)
			m.Holdout.Every = 1000 // the odd record goes to training
			h := newHarness(t, m)
			rng := rand.New(rand.NewPCG(3, 3))
			rec := func(ts int64, has bool) *record.Record {
				a, b := rng.NormFloat64(), rng.NormFloat64()
				return &record.Record{X: []float64{a, b}, Y: 2*a - b + 0.1*rng.NormFloat64(), W: 1, T: ts, HasT: has}
			}
			apply := func(r *record.Record) {
				t.Helper()
				if _, err := h.p.Apply(r, h.names, h.now); err != nil {
					t.Fatal(err)
				}
			}
			for i := range 3000 {
				apply(rec(t0+int64(i)*10, true))
			}
			before := h.p.Ladder().Len()
			apply(rec(tc.t, tc.has))
			if got := h.p.Ladder().Len(); got != before+1 {
				t.Fatalf("window %d records after the odd record, want %d (nothing evicted)", got, before+1)
			}
			// The stream goes on for 2 minutes, a record every 20 ms: the
			// span keeps the newest minute, 3000 records, and the odd
			// record is gone once it reached the oldest end.
			for i := range 6000 {
				apply(rec(t0+30_000+int64(i)*20, true))
			}
			if n := h.p.Ladder().Len(); n < 2995 || n > 3001 {
				t.Errorf("window %d records after the stream went on, want the span's 3001 less the few held out", n)
			}
			mod := h.p.Ladder().Model(0)
			for j, c := range append(mod.Coef, mod.Intercept) {
				if math.IsNaN(c) || math.IsInf(c, 0) {
					t.Errorf("coefficient %d = %v", j, c)
				}
			}
		})
	}
}

// TestSpanWindowUntimed checks a time-span model fed records without "t":
// one record that carries a time must not evict them all (they take the
// newest time seen, so they neither move the span nor are evicted early,
// the convention of window.Timed).
func TestSpanWindowUntimed(t *testing.T) {
	m := config.DefaultModel()
	m.Name, m.Subject = "untimed", "test.untimed"
	m.Features, m.MaxFeatures = []string{"a"}, 1
	m.Window.Records, m.Window.Span = 5000, config.Duration(time.Minute)
	m.Holdout.Every = 1000
	h := newHarness(t, m)
	now := time.Date(2026, 3, 4, 5, 0, 0, 0, time.UTC).UnixMilli()
	for i := range 3000 {
		h.feed([]float64{float64(i % 10)}, float64(i%7))
	}
	before := h.p.Ladder().Len()
	r := &record.Record{X: []float64{1}, Y: 1, W: 1, T: now, HasT: true}
	if _, err := h.p.Apply(r, h.names, h.now); err != nil {
		t.Fatal(err)
	}
	if got := h.p.Ladder().Len(); got != before+1 {
		t.Errorf("window %d records after one timed record, want %d", got, before+1)
	}
}
