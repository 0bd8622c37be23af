package daemon

import (
	"fmt"
	"log/slog"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink/natstest"
)

// TestNameFlood sends, through the real daemon and its embedded NATS
// server, a legitimate stream, then 50,000 records each carrying a fresh
// junk channel name besides the real channels, then the real stream with a
// new legitimate channel. The cap fills, the junk values are dropped and
// counted (lariat_features_dropped_total), junk slots age out and are
// counted (lariat_feature_slots_freed_total), the model keeps publishing
// through the flood, the new channel gets a slot within about one window
// of records after the flood stops and enters the model, and no published
// document ever fails or names a junk channel once its slot is freed.
func TestNameFlood(t *testing.T) {
	if testing.Short() {
		t.Skip("50,000 records through the daemon")
	}
	const window, flood, batch = 1000, 50000, 250
	m := testModel("flood", "flood.records", config.LossSquared)
	m.Window.Records, m.Holdout.Records, m.MaxFeatures = window, 250, 16
	var logs syncBuffer
	td := startDaemon(t, testConfig(t, m), WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	pub := connect(t, td.NATSURL())
	w := td.byName["flood"]
	rng := rand.New(rand.NewPCG(7, 8))
	applied := func() float64 {
		return metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": "flood"})
	}
	sent := 0
	send := func(n int, junk func(i int) string, withD bool) {
		t.Helper()
		for i := range n {
			a, b, c, d := rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()
			y := 2*a - b + 0.1*rng.NormFloat64()
			var sb strings.Builder
			fmt.Fprintf(&sb, `{"y":%.4f,"x":{"a":%.4f,"b":%.4f,"c":%.4f`, y+boolF(withD)*1.5*d, a, b, c)
			if withD {
				fmt.Fprintf(&sb, `,"d":%.4f`, d)
			}
			if junk != nil {
				fmt.Fprintf(&sb, `,%q:1`, junk(i))
			}
			sb.WriteString("}}")
			if err := pub.Publish(m.Subject, []byte(sb.String())); err != nil {
				t.Fatal(err)
			}
		}
		sent += n
		natstest.WaitFor(t, 60*time.Second, func() error {
			if got := applied(); int(got) < sent {
				return fmt.Errorf("%v of %d applied", got, sent)
			}
			return nil
		})
	}
	names := func() (out []string) {
		w.exec(func() { out = slices.Clone(w.pipe.Names()) })
		return out
	}
	send(2000, nil, false)
	natstest.WaitFor(t, 10*time.Second, func() error {
		if w.snap.Load() == nil {
			return fmt.Errorf("nothing published")
		}
		return nil
	})
	before := w.snap.Load().Doc.Version
	junkName := func(i int) string { return "junk" + strconv.Itoa(i) }
	send(flood, junkName, false)
	after := w.snap.Load()
	if after.Doc.Version <= before {
		t.Fatalf("no version published during the flood (%d then %d)", before, after.Doc.Version)
	}
	dropped := metricValue(t, td.Daemon, "lariat_features_dropped_total", map[string]string{"model": "flood"})
	freed := metricValue(t, td.Daemon, "lariat_feature_slots_freed_total", map[string]string{"model": "flood"})
	// 13 slots for junk; each can be reused once per FreeAfter records.
	if dropped < flood*9/10 || freed == 0 {
		t.Fatalf("dropped %v, freed %v of %d junk names", dropped, freed, flood)
	}
	t.Logf("flood: %v names dropped, %v slots freed, version %d → %d", dropped, freed, before, after.Doc.Version)
	if n := strings.Count(logs.String(), "feature cap reached"); n != 1 {
		t.Errorf("the flood was logged %d times, want once", n)
	}
	// The new legitimate channel: count the records until it has a slot.
	got := 0
	for got = 0; !slices.Contains(names(), "d"); got += batch {
		if got > 3*window {
			t.Fatalf("no slot for a new channel %d records after the flood; names %q", got, names())
		}
		send(batch, nil, true)
	}
	limit := freeAfter(&m) + 64 + batch // a whole window, a scan, one batch
	t.Logf("new channel got its slot within %d records after the flood (window %d, free after %d)", got, window, freeAfter(&m))
	if got > limit {
		t.Fatalf("slot after %d records, want at most %d", got, limit)
	}
	// Two more windows: the junk is gone from the names and the document,
	// and d is in the model.
	send(2*window+batch, nil, true)
	natstest.WaitFor(t, 20*time.Second, func() error {
		s := w.snap.Load()
		for _, n := range s.Names {
			if strings.HasPrefix(n, "junk") {
				return fmt.Errorf("document still names %s", n)
			}
		}
		if s.Doc.Coefficients["d"] == 0 {
			return fmt.Errorf("d not in the model: %v", s.Doc.Coefficients)
		}
		return nil
	})
	for _, n := range names() {
		if strings.HasPrefix(n, "junk") {
			t.Errorf("pipeline still names %s", n)
		}
	}
	if f := metricValue(t, td.Daemon, "lariat_model_publish_failures_total", map[string]string{"model": "flood"}); f != 0 {
		t.Errorf("%v publication failures", f)
	}
}

func boolF(b bool) float64 {
	if b {
		return 1
	}
	return 0
}
