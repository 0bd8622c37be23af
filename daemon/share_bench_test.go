package daemon

import (
	"context"
	"fmt"
	"testing"
	"time"

	"lariat/sink/natstest"
)

// BenchmarkSharedThroughput measures a 50-key template in 24 partitions
// shared by 1, 2, 3 and 8 lariat processes, all in this test process, on one
// embedded NATS server, and the same template unshared (one partition,
// one ordered reader) in one process, then the same with 1,000 keys:
// records per second from the first of 50,000 records published
// (natstest.PublishAll, after one record per key has spread the
// partitions) to the last applied, the stream, pinned pulls, dispatch,
// model goroutines and checkpoints to the bucket included. On a machine
// of two cores the processes share the same two cores, so the figures say
// what sharing costs, not what more machines gain. unshared is the
// baseline of the same run.
//
//	go test -run '^$' -bench SharedThroughput -benchtime 1x ./daemon/
func BenchmarkSharedThroughput(b *testing.B) {
	b.Run("keys=50/unshared", func(b *testing.B) { benchShared(b, 50, 1, 1) })
	for _, procs := range []int{1, 2, 3, 8} {
		b.Run(fmt.Sprintf("keys=50/processes=%d", procs), func(b *testing.B) { benchShared(b, 50, procs, 24) })
	}
	b.Run("keys=1000/unshared", func(b *testing.B) { benchShared(b, 1000, 1, 1) })
	for _, procs := range []int{1, 3, 8} {
		b.Run(fmt.Sprintf("keys=1000/processes=%d", procs), func(b *testing.B) { benchShared(b, 1000, procs, 24) })
	}
}

// benchShared publishes 50,000 records over keys keys (after one per key)
// to procs processes sharing parts partitions.
func benchShared(b *testing.B, keys, procs, parts int) {
	perKey := 50000 / keys
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
	publish := func(from, to int) {
		ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
		defer cancel()
		res, err := natstest.PublishAll(ctx, nc, to-from, func(i int) (string, []byte) {
			return kr.subj[from+i], kr.data[from+i]
		}, nil)
		if err != nil || res.Resent > 0 {
			b.Fatalf("published %+v: %v", res, err)
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
