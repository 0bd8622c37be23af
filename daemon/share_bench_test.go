package daemon

import (
	"context"
	"fmt"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/natstest"
)

// BenchmarkSharedThroughput measures a 50-key template in 24 partitions
// shared by 1, 2, 3 and 8 lariat processes, all in this test process, on one
// embedded NATS server, and the same template unshared (one partition,
// one ordered reader) in one process: records per second from the first
// of 50,000 records published (asynchronously, after one record per key has spread
// the partitions) to the last applied, the stream, pinned pulls, dispatch,
// model goroutines and checkpoints to the bucket included. On a machine
// of two cores the processes share the same two cores, so the figures say
// what sharing costs, not what more machines gain. processes=1 is the
// baseline of the same run.
//
//	go test -run '^$' -bench SharedThroughput -benchtime 1x ./daemon/
func BenchmarkSharedThroughput(b *testing.B) {
	b.Run("unshared", func(b *testing.B) { benchShared(b, 1, 1) })
	for _, procs := range []int{1, 2, 3, 8} {
		b.Run(fmt.Sprintf("processes=%d", procs), func(b *testing.B) { benchShared(b, procs, 24) })
	}
}

func benchShared(b *testing.B, procs, parts int) {
	const keys, perKey = 50, 1000
	kr := makeKeyed(keys, perKey+1, 900)
	srv := runServer(b, -1, b.TempDir())
	url := srv.ClientURL()
	var ds []*Daemon
	for range procs {
		td := startDaemon(b, sharedConfig(b, url, parts, 1), withoutIdle())
		natstest.WaitFor(b, 30*time.Second, td.Ready)
		ds = append(ds, td.Daemon)
	}
	natstest.WaitFor(b, 30*time.Second, func() error {
		for _, d := range ds {
			if parts == 1 {
				return nil
			}
			if v := d.tmpl["trip"].shared.view(); len(v) != procs {
				return fmt.Errorf("members %v", v)
			}
		}
		return nil
	})
	nc := connect(b, url)
	js, err := jetstream.New(nc)
	if err != nil {
		b.Fatal(err)
	}
	publish := func(from, to int) {
		for i := from; i < to; i++ {
			if _, err := js.PublishAsync(kr.subj[i], kr.data[i]); err != nil {
				b.Fatal(err)
			}
		}
		select {
		case <-js.PublishAsyncComplete():
		case <-time.After(60 * time.Second):
			b.Fatal("publications not acknowledged")
		}
	}
	warm := keys // the first record of each key (the interleaving starts with every key)
	publish(0, warm)
	if parts > 1 {
		natstest.WaitFor(b, 30*time.Second, func() error { return balanced(ds) })
	}
	waitAccepted(b, ds, warm)
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		publish(warm, len(kr.data))
		waitAccepted(b, ds, len(kr.data))
		b.ReportMetric(float64(len(kr.data)-warm)/time.Since(t0).Seconds(), "records/s")
	}
}

// waitAccepted waits until the processes have accepted n records in all.
func waitAccepted(b *testing.B, ds []*Daemon, n int) {
	b.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
	defer cancel()
	for ctx.Err() == nil {
		total := 0.0
		for _, d := range ds {
			total += metricSum(b, d, "lariat_records_accepted_total")
		}
		if total >= float64(n) {
			return
		}
		time.Sleep(20 * time.Millisecond)
	}
	b.Fatalf("fewer than %d records accepted within 120 s", n)
}

// metricSum returns the sum of every series of a counter.
func metricSum(t testing.TB, d *Daemon, name string) float64 {
	t.Helper()
	mfs, err := d.Registry().Gather()
	if err != nil {
		t.Fatal(err)
	}
	s := 0.0
	for _, mf := range mfs {
		if mf.GetName() == name {
			for _, m := range mf.GetMetric() {
				s += m.GetCounter().GetValue()
			}
		}
	}
	return s
}
