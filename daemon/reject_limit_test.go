package daemon

import (
	"fmt"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
	"lariat/sink/natstest"
)

// withRejectLimit sets the republish limit of every model's rejects.
func withRejectLimit(rate float64, burst int) Option {
	return func(d *Daemon) error { d.rejectRate, d.rejectBurst = rate, burst; return nil }
}

// TestRejectBodyCut sends rejected records of several sizes through a
// real NATS server: a record the decoder could have accepted is republished
// whole, a longer one (up to 1 MB) is cut to record.DefaultMaxBytes with its
// original length in Lariat-Truncated.
func TestRejectBodyCut(t *testing.T) {
	m := testModel("cut", "test.cut", config.LossSquared)
	td := startDaemon(t, testConfig(t, m), withoutIdle())
	nc := connect(t, td.NATSURL())
	rejects := make(chan *nats.Msg, 8)
	if _, err := nc.ChanSubscribe("lariat.reject.cut", rejects); err != nil {
		t.Fatal(err)
	}
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, td.Ready)

	pad := func(n int) string { // a malformed record (an unterminated string) of exactly n bytes
		const head = `{"y":1,"x":{"a":1},"key":"`
		return head + strings.Repeat("k", n-len(head))
	}
	cases := []struct {
		name   string
		size   int
		reason string
		cut    bool
	}{
		{"small malformed record", 100, record.ReasonMalformed, false},
		{"largest record the decoder reads", record.DefaultMaxBytes, record.ReasonMalformed, false},
		{"one byte over", record.DefaultMaxBytes + 1, record.ReasonOversize, true},
		{"1 MB record", 1_000_000, record.ReasonOversize, true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			body := pad(tc.size)
			if len(body) != tc.size {
				t.Fatalf("test record of %d bytes, want %d", len(body), tc.size)
			}
			if err := nc.Publish(m.Subject, []byte(body)); err != nil {
				t.Fatal(err)
			}
			nc.Flush()
			var msg *nats.Msg
			select {
			case msg = <-rejects:
			case <-time.After(10 * time.Second):
				t.Fatal("no reject message")
			}
			if got := msg.Header.Get(sink.HeaderReason); got != tc.reason {
				t.Errorf("reason %q, want %q", got, tc.reason)
			}
			want, trunc := body, ""
			if tc.cut {
				want, trunc = body[:record.DefaultMaxBytes], strconv.Itoa(tc.size)
			}
			if got := msg.Header.Get(sink.HeaderTruncated); got != trunc {
				t.Errorf("Lariat-Truncated %q, want %q", got, trunc)
			}
			if string(msg.Data) != want {
				t.Errorf("body of %d bytes, want the first %d of the record", len(msg.Data), len(want))
			}
		})
	}
}

// TestRejectRateLimit sends bursts of bad records beyond the republish
// limit (here a burst of 10 that never refills) to two models through a
// real NATS server: each model republishes exactly its burst, counts the
// rest as not republished, and counts every one as rejected.
func TestRejectRateLimit(t *testing.T) {
	const burst, sent = 10, 50
	a := testModel("flood-a", "test.flood.a", config.LossSquared)
	b := testModel("flood-b", "test.flood.b", config.LossLogistic)
	for _, mode := range []string{config.IntakeCore, config.IntakeDurable} {
		t.Run(mode, func(t *testing.T) {
			td := startDaemon(t, testConfigMode(t, mode, a, b), withoutIdle(), withRejectLimit(1e-9, burst))
			nc := connect(t, td.NATSURL())
			rejects := make(chan *nats.Msg, 4*sent)
			if _, err := nc.ChanSubscribe("lariat.reject.>", rejects); err != nil {
				t.Fatal(err)
			}
			nc.Flush()
			natstest.WaitFor(t, 10*time.Second, td.Ready)
			// Half fail in the decoder (the subscription's goroutine), half
			// in the pipeline (the model goroutine: the learner refuses a
			// value of 1e60), so the limiter is shared by both.
			for i := range sent {
				for _, m := range []config.Model{a, b} {
					msg := `{"y":1,"x":{"a":1}`
					if i%2 == 1 {
						msg = `{"y":1,"x":{"a":1e60}}`
					}
					if err := nc.Publish(m.Subject, []byte(msg)); err != nil {
						t.Fatal(err)
					}
				}
			}
			nc.Flush()
			for _, m := range []string{"flood-a", "flood-b"} {
				natstest.WaitFor(t, 10*time.Second, func() error {
					if n := rejectedTotal(t, td.Daemon, m); n != sent {
						return fmt.Errorf("%s: %v rejects counted, want %d", m, n, sent)
					}
					return nil
				})
			}
			if n := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": "flood-a"}); n != 0 {
				t.Errorf("%v bad records accepted", n)
			}
			// Every reject has been counted, so every republication has been
			// sent; a round trip to the server flushes them to us.
			nc.Flush()
			time.Sleep(200 * time.Millisecond)
			got := map[string]int{}
			for len(rejects) > 0 {
				got[(<-rejects).Header.Get(sink.HeaderModel)]++
			}
			for _, m := range []string{"flood-a", "flood-b"} {
				if got[m] != burst {
					t.Errorf("%s: %d rejects republished, want %d", m, got[m], burst)
				}
				if n := metricValue(t, td.Daemon, "lariat_rejects_not_republished_total", map[string]string{"model": m}); n != sent-burst {
					t.Errorf("%s: lariat_rejects_not_republished_total %v, want %d", m, n, sent-burst)
				}
			}
		})
	}
}

// TestRejectLimiter checks the token bucket on a clock of its own: a full
// burst, then one token per 1/rate seconds, never more than the burst, and
// a time that goes backwards adds nothing.
func TestRejectLimiter(t *testing.T) {
	t0 := time.Unix(1e9, 0)
	l := newRejectLimiter(100, 5) // a token every 10 ms
	steps := []struct {
		at    time.Duration
		n     int // calls
		allow int // of which allowed
	}{
		{0, 8, 5},                     // the burst
		{5 * time.Millisecond, 1, 0},  // half a token
		{12 * time.Millisecond, 2, 1}, // 1.2 tokens
		{5 * time.Millisecond, 1, 0},  // back in time: nothing new
		{47 * time.Millisecond, 5, 3}, // 35 ms more: 3.7 tokens
		{time.Hour, 10, 5},            // refilled to the burst, not beyond
		{time.Hour + time.Second, 200, 5},
	}
	for i, s := range steps {
		got := 0
		for range s.n {
			if l.AllowN(t0.Add(s.at), 1) {
				got++
			}
		}
		if got != s.allow {
			t.Errorf("step %d (at %v): %d of %d allowed, want %d", i, s.at, got, s.n, s.allow)
		}
	}
}

// rejectedTotal sums lariat_records_rejected_total of model over reasons.
func rejectedTotal(t testing.TB, d *Daemon, model string) float64 {
	t.Helper()
	mfs, err := d.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	var n float64
	for _, mf := range mfs {
		if mf.GetName() != "lariat_records_rejected_total" {
			continue
		}
		for _, m := range mf.GetMetric() {
			for _, l := range m.GetLabel() {
				if l.GetName() == "model" && l.GetValue() == model {
					n += m.GetCounter().GetValue()
				}
			}
		}
	}
	return n
}
