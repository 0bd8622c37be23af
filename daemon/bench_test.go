package daemon

import (
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strconv"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus/testutil"

	"lariat/config"
	"lariat/sink/natstest"
)

// benchRecords returns n distinct named-feature JSON records with d
// features (about 440 bytes for d = 32).
func benchRecords(n, d int) ([][]byte, []string) {
	rng := rand.New(rand.NewPCG(1, 2))
	names := make([]string, d)
	for j := range names {
		names[j] = fmt.Sprintf("f%02d", j)
	}
	out := make([][]byte, n)
	for i := range out {
		b := []byte(`{"y":`)
		var y float64
		x := make([]float64, d)
		for j := range x {
			x[j] = rng.NormFloat64()
		}
		y = 2*x[1] - x[5] + 0.5*x[9] + 0.3*rng.NormFloat64()
		b = strconv.AppendFloat(b, y, 'f', 3, 64)
		b = append(b, `,"x":{`...)
		for j, name := range names {
			if j > 0 {
				b = append(b, ',')
			}
			b = append(b, '"')
			b = append(b, name...)
			b = append(b, `":`...)
			b = strconv.AppendFloat(b, x[j], 'f', 3, 64)
		}
		out[i] = append(b, "}}"...)
	}
	return out, names
}

// BenchmarkThroughput measures records per second through the whole daemon
// (embedded NATS on loopback, one squared-loss model with K = 12, d = 32,
// named-feature JSON of about 440 bytes) and, in the same run on the same
// server and messages, (a) a plain subscriber that only receives and (b)
// one that also decodes each message with encoding/json into a map. It
// reports msgs/s for each and the ratios daemon/(a) and daemon/(b); ns/op
// covers all three phases and means little on its own. It runs with the
// durable intake (the default: the records go through the model's
// JetStream stream, stored on disk) and with core intake.
//
//	go test -run '^$' -bench Throughput -benchtime 200000x ./daemon/
func BenchmarkThroughput(b *testing.B) {
	for _, mode := range []string{config.IntakeDurable, config.IntakeCore} {
		b.Run("intake="+mode, func(b *testing.B) { throughput(b, mode) })
	}
}

func throughput(b *testing.B, mode string) {
	const d, queue = 32, 1 << 15
	msgs, names := benchRecords(4096, d)
	size := 0
	for _, m := range msgs {
		size += len(m)
	}
	m := config.DefaultModel()
	m.Name, m.Subject = "bench", "bench.records"
	m.Features, m.MaxFeatures = names, d
	m.Queue = queue
	td := startDaemon(b, testConfigMode(b, mode, m))
	natstest.WaitFor(b, 10*time.Second, td.Ready)
	pub := connect(b, td.NATSURL())
	n := b.N

	b.ResetTimer()
	accepted := td.byName["bench"].mm.Accepted
	applied := func() int { return int(testutil.ToFloat64(accepted)) }
	daemonRate := measure(b, n, func() {
		base := applied()
		for i := range n {
			if i%1024 == 0 { // flow control: keep at most half the queue in flight
				for i-(applied()-base) > queue/2 {
					time.Sleep(50 * time.Microsecond)
				}
			}
			pub.Publish(m.Subject, msgs[i%len(msgs)])
		}
		pub.Flush()
		for applied()-base < n {
			time.Sleep(100 * time.Microsecond)
		}
	})
	if r := td.byName["bench"].rejected.Load(); r != 0 {
		b.Fatalf("%d records rejected", r)
	}
	recvRate := measure(b, n, plainSubscriber(b, td.NATSURL(), pub, msgs, n, nil))
	var sink map[string]any
	decodeRate := measure(b, n, plainSubscriber(b, td.NATSURL(), pub, msgs, n, func(data []byte) {
		sink = nil
		if err := json.Unmarshal(data, &sink); err != nil {
			panic(err)
		}
	}))
	b.StopTimer()
	b.ReportMetric(daemonRate, "daemon-msgs/s")
	b.ReportMetric(recvRate, "receive-msgs/s")
	b.ReportMetric(decodeRate, "jsonmap-msgs/s")
	b.ReportMetric(daemonRate/recvRate, "daemon/receive")
	b.ReportMetric(daemonRate/decodeRate, "daemon/jsonmap")
	b.ReportMetric(float64(size)/float64(len(msgs)), "bytes/msg")
}

// measure runs f (which moves n messages) and returns n per second.
func measure(b *testing.B, n int, f func()) float64 {
	b.Helper()
	start := time.Now()
	f()
	return float64(n) / time.Since(start).Seconds()
}

// plainSubscriber returns a phase that publishes n messages and waits until
// a plain subscriber on its own connection has received them all, calling
// work on each.
func plainSubscriber(b *testing.B, url string, pub *nats.Conn, msgs [][]byte, n int, work func([]byte)) func() {
	nc := connect(b, url)
	var got atomic.Int64
	done := make(chan struct{})
	subject := fmt.Sprintf("bench.plain.%d", time.Now().UnixNano())
	sub, err := nc.Subscribe(subject, func(m *nats.Msg) {
		if work != nil {
			work(m.Data)
		}
		if got.Add(1) == int64(n) {
			close(done)
		}
	})
	if err != nil {
		b.Fatal(err)
	}
	sub.SetPendingLimits(-1, -1)
	nc.Flush()
	return func() {
		for i := range n {
			pub.Publish(subject, msgs[i%len(msgs)])
		}
		pub.Flush()
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
		defer cancel()
		select {
		case <-done:
		case <-ctx.Done():
			b.Fatalf("received %d of %d", got.Load(), n)
		}
		sub.Unsubscribe()
	}
}
