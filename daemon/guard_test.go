package daemon

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
	"lariat/sink/natstest"
)

// TestGuardOverNATS is the wiring of the plausibility guard through a
// running daemon and its embedded NATS server: a model warmed with 300
// ordinary records gets one wild value (1e29) and one value outside its
// configured bounds; each is counted under its reason
// (lariat_records_rejected_total), republished on lariat.reject.<model>
// with the reason header and the original bytes, and leaves the ladder bit
// for bit as it was; an ordinary record after them is accepted and the
// model publishes it.
func TestGuardOverNATS(t *testing.T) {
	m := testModel("guard-bus", "test.guard.bus", config.LossSquared)
	m.Guard.Bounds = []config.Bound{{Feature: "c", Min: config.Limit{V: 0, Set: true}}}
	td := startDaemon(t, testConfig(t, m), withoutIdle())
	nc := connect(t, td.NATSURL())
	rejects := make(chan *nats.Msg, 8)
	if _, err := nc.ChanSubscribe("lariat.reject.guard-bus", rejects); err != nil {
		t.Fatal(err)
	}
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	rng := rand.New(rand.NewPCG(5, 5))
	for range 300 {
		a, b := 10+rng.NormFloat64(), rng.NormFloat64()
		msg := fmt.Appendf(nil, `{"y":%g,"x":{"a":%g,"b":%g,"c":%g}}`, 2*a-b+rng.NormFloat64(), a, b, 1+rng.Float64())
		if err := nc.Publish(m.Subject, msg); err != nil {
			t.Fatal(err)
		}
	}
	nc.Flush()
	accepted := func(n float64) func() error {
		return func() error {
			if got := metricValue(t, td.Daemon, "lariat_records_accepted_total", map[string]string{"model": m.Name}); got != n {
				return fmt.Errorf("accepted %v, want %v", got, n)
			}
			return nil
		}
	}
	natstest.WaitFor(t, 10*time.Second, accepted(300))
	w := td.byName[m.Name]
	for _, tc := range []struct{ body, reason string }{
		{`{"y":20,"x":{"a":1e29,"b":0,"c":1}}`, record.ReasonImplausible},
		{`{"y":20,"x":{"a":10,"b":0,"c":-1}}`, record.ReasonOutOfRange},
	} {
		prev := snapshotLadder(t, w)
		labels := map[string]string{"model": m.Name, "reason": tc.reason}
		n0 := metricValue(t, td.Daemon, "lariat_records_rejected_total", labels)
		if err := nc.Publish(m.Subject, []byte(tc.body)); err != nil {
			t.Fatal(err)
		}
		nc.Flush()
		select {
		case msg := <-rejects:
			if got := msg.Header.Get(sink.HeaderReason); got != tc.reason {
				t.Errorf("reason header %q, want %q (detail %q)", got, tc.reason, msg.Header.Get(sink.HeaderDetail))
			}
			if string(msg.Data) != tc.body {
				t.Errorf("body %q, want %q", msg.Data, tc.body)
			}
		case <-time.After(5 * time.Second):
			t.Fatalf("%s: no reject message", tc.reason)
		}
		natstest.WaitFor(t, 5*time.Second, func() error {
			if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", labels); got != n0+1 {
				return fmt.Errorf("rejected{%s} = %v, want %v", tc.reason, got, n0+1)
			}
			return nil
		})
		if err := sameBits(prev, snapshotLadder(t, w)); err != nil {
			t.Errorf("%s: ladder changed: %v", tc.reason, err)
		}
	}
	v0 := metricValue(t, td.Daemon, "lariat_model_version", map[string]string{"model": m.Name})
	if err := nc.Publish(m.Subject, []byte(`{"y":20,"x":{"a":10,"b":0,"c":1}}`)); err != nil {
		t.Fatal(err)
	}
	nc.Flush()
	natstest.WaitFor(t, 10*time.Second, accepted(301))
	natstest.WaitFor(t, 10*time.Second, func() error {
		if v := metricValue(t, td.Daemon, "lariat_model_version", map[string]string{"model": m.Name}); v <= v0 {
			return fmt.Errorf("version %v, still %v", v, v0)
		}
		return nil
	})
}
