package daemon

import (
	"bufio"
	"fmt"
	"log/slog"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink/natstest"
)

// stallIntake makes the model's subscription callback block while the
// model goroutine is held: the queue between them becomes unbuffered, so
// intake waits in its hand-over instead of queueing (or rejecting with
// queue_full). That is a subscription callback slower than the stream, the
// situation in which the NATS client drops messages past its pending
// limits. Call it between New and Run, before any goroutine reads w.queue.
func stallIntake(w *worker) { w.queue = make(chan *item) }

// scrapeMetric reads one sample from the daemon's /metrics endpoint; ok is
// false if the series is absent.
func scrapeMetric(t testing.TB, d *Daemon, series string) (v float64, ok bool) {
	t.Helper()
	c := &http.Client{Timeout: 2 * time.Second}
	resp, err := c.Get("http://" + d.HTTPAddr() + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	sc := bufio.NewScanner(resp.Body)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		if rest, found := strings.CutPrefix(sc.Text(), series+" "); found {
			v, err := strconv.ParseFloat(rest, 64)
			if err != nil {
				t.Fatalf("%s: %v", sc.Text(), err)
			}
			return v, true
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return 0, false
}

// TestSlowConsumer floods a model's subject while its goroutine is held,
// with tiny per-subscription pending limits (nats.pending_msgs 10,
// nats.pending_bytes at the 1 MiB minimum). Every published record must end
// up counted exactly once: accepted (and then applied to the ladder or the
// holdout), rejected, or dropped by the NATS client and counted in
// lariat_nats_slow_consumer_drops_total{model}; drops are also logged.
//
//   - "callback stalled": the subscription callback itself blocks (see
//     stallIntake), so the client must drop past 10 pending messages:
//     drops > 0, shown on /metrics, and accepted + drops == published.
//   - "queue full": the callback does not block; the model's one-record
//     queue overflows, so the excess is rejected as queue_full (the bounded
//     queue guards the subscription, see TestRejectQueueFull), and
//     accepted + queue_full + drops == published whatever the drops are.
func TestSlowConsumer(t *testing.T) {
	const n = 2000
	cases := []struct {
		name      string
		stall     bool
		queue     int  // model queue length
		wantDrops bool // drops must be > 0
	}{
		{"callback stalled", true, config.DefaultModel().Queue, true},
		{"queue full", false, 1, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m := testModel("slow", "test.slow", config.LossSquared)
			m.Queue = tc.queue
			cfg := testConfigMode(t, config.IntakeCore, m) // slow consumers are a core NATS matter
			cfg.NATS.PendingMsgs = 10
			cfg.NATS.PendingBytes = 1 << 20 // the minimum config.Validate accepts
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			var logs syncBuffer
			d, err := New(cfg, withoutIdle(), WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
			if err != nil {
				t.Fatal(err)
			}
			w := d.byName["slow"]
			if tc.stall {
				stallIntake(w)
			}
			td := runDaemon(t, d)
			nc := connect(t, td.NATSURL())
			natstest.WaitFor(t, 5*time.Second, td.Ready)

			// Hold the model goroutine, then flood its subject.
			release := make(chan struct{})
			letGo := sync.OnceFunc(func() { close(release) })
			t.Cleanup(letGo) // runs before the daemon's stop if the test fails early
			stalled := make(chan struct{})
			go w.exec(func() { close(stalled); <-release })
			<-stalled
			for _, rec := range sparseTruth(4).records(n, false, 21) {
				if err := nc.Publish(m.Subject, rec); err != nil {
					t.Fatal(err)
				}
			}
			if err := nc.Flush(); err != nil { // the server has every record
				t.Fatal(err)
			}
			labels := map[string]string{"model": "slow"}
			queueFull := map[string]string{"model": "slow", "reason": reasonQueueFull}
			metric := func(name string, l map[string]string) float64 { return metricValue(t, td.Daemon, name, l) }
			drops := func() float64 { return metric("lariat_nats_slow_consumer_drops_total", labels) }
			if tc.wantDrops {
				natstest.WaitFor(t, 5*time.Second, func() error {
					if got := drops(); got <= 0 {
						return fmt.Errorf("slow-consumer drops %v while the callback is stalled", got)
					}
					return nil
				})
			} else {
				// Every record but the one queued was rejected or dropped.
				natstest.WaitFor(t, 5*time.Second, func() error {
					if got := metric("lariat_records_rejected_total", queueFull) + drops(); got != n-1 {
						return fmt.Errorf("queue_full + drops = %v, want %d", got, n-1)
					}
					return nil
				})
			}
			if got := metric("lariat_records_accepted_total", labels); got != 0 {
				t.Errorf("accepted %v while the model goroutine is held", got)
			}
			letGo()

			var accepted, rejected, dropped float64
			natstest.WaitFor(t, 5*time.Second, func() error {
				accepted, rejected, dropped = metric("lariat_records_accepted_total", labels),
					metric("lariat_records_rejected_total", queueFull), drops()
				if accepted+rejected+dropped != n {
					return fmt.Errorf("accepted %v + queue_full %v + dropped %v != published %d", accepted, rejected, dropped, n)
				}
				return nil
			})
			t.Logf("published %d: accepted %v, queue_full %v, slow-consumer drops %v", n, accepted, rejected, dropped)
			if accepted < 1 {
				t.Errorf("accepted %v, want the records that got through", accepted)
			}
			if got := w.rejected.Load(); float64(got) != rejected {
				t.Errorf("rejected %d in all, %v as queue_full: another reason crept in", got, rejected)
			}
			// No accepted record is lost: each is in the ladder or the holdout.
			var seen, held uint64
			if !w.exec(func() { seen = w.pipe.Ladder().Seen(); _, held = w.pipe.Counts() }) {
				t.Fatal("model goroutine stopped")
			}
			if float64(seen+held) != accepted {
				t.Errorf("applied %d (ladder %d + holdout %d), accepted %v", seen+held, seen, held, accepted)
			}
			if dropped == 0 {
				return
			}
			// The drops are visible on /metrics and in the log.
			if got, ok := scrapeMetric(t, td.Daemon, `lariat_nats_slow_consumer_drops_total{model="slow"}`); !ok || got != dropped {
				t.Errorf("/metrics: drops %v (present %v), registry %v", got, ok, dropped)
			}
			natstest.WaitFor(t, 5*time.Second, func() error {
				if s := logs.String(); !strings.Contains(s, "slow consumer") || !strings.Contains(s, m.Subject) {
					return fmt.Errorf("no slow-consumer log line for %s:\n%s", m.Subject, s)
				}
				return nil
			})
		})
	}
}
