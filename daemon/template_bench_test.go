package daemon

import (
	"context"
	"fmt"
	"os"
	"runtime"
	"strconv"
	"sync"
	"testing"
	"time"

	"lariat/config"
)

// BenchmarkTemplateInstances measures a template with 1, 1,000 and 10,000
// instance keys (small windows: 20 train and 10 held-out records, K = 12,
// d = 10, idle steps at their default): records per second through the
// template's dispatch, each instance's queue and model goroutine (no NATS:
// the stream reader's side is measured by BenchmarkThroughput), and the
// memory per instance (Go heap after a GC, once every instance has full
// windows, divided by the instances) and the size of one instance's saved
// state. instances=1 is the baseline of the same run. LARIAT_BENCH_FILL
// sets the records per instance before the timed part (default 55, which
// fills the windows; the 10k case then takes many minutes on two cores).
//
//	go test -run '^$' -bench TemplateInstances -benchtime 100000x -timeout 30m ./daemon/
func BenchmarkTemplateInstances(b *testing.B) {
	for _, k := range []int{1, 1000, 10000} {
		b.Run(fmt.Sprintf("instances=%d", k), func(b *testing.B) { benchInstances(b, k) })
	}
}

func benchInstances(b *testing.B, keys int) {
	const d = 10
	msgs, names := benchRecords(4096, d)
	m := config.DefaultModel()
	m.Name, m.Subject = "bench", "bench.*.rec"
	m.Features, m.MaxFeatures = names, d
	m.Window.Records, m.Holdout.Records, m.Retune.Every = 20, 10, 25
	m.Instances.KeyToken, m.Instances.Max, m.Instances.Idle = 2, keys, 0
	cfg := config.Default()
	cfg.DataDir = b.TempDir()
	cfg.Models = []config.Model{m}
	if err := cfg.Validate(); err != nil {
		b.Fatal(err)
	}
	dm, err := New(cfg)
	if err != nil {
		b.Fatal(err)
	}
	var wg sync.WaitGroup
	dm.wg = &wg
	t := dm.tmpl["bench"]
	subjects := make([]string, keys)
	for i := range subjects {
		subjects[i] = fmt.Sprintf("bench.k%05d.rec", i)
	}
	stop := make(chan struct{})
	seq := uint64(0)
	feed := func(n int) {
		for i := range n {
			seq++
			t.dispatch(t.parts[0], subjects[i%keys], msgs[int(seq)%len(msgs)], seq, stop, nil)
		}
	}
	drain := func() {
		for _, w := range t.workers() {
			for len(w.queue) > 0 {
				time.Sleep(time.Millisecond)
			}
			w.exec(func() {})
		}
	}
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	fill := 55 // every instance's windows full
	if f, err := strconv.Atoi(os.Getenv("LARIAT_BENCH_FILL")); err == nil && f > 0 {
		fill = f // fewer records per instance before the timed part
	}
	feed(keys * fill)
	drain()
	runtime.GC()
	runtime.ReadMemStats(&after)
	var state int
	w := t.workers()[0]
	w.exec(func() {
		s, err := w.pipe.MarshalBinary()
		if err != nil {
			b.Error(err)
		}
		state = len(s)
	})

	b.ResetTimer()
	start := time.Now()
	feed(b.N)
	drain()
	el := time.Since(start)
	b.StopTimer()
	b.ReportMetric(float64(b.N)/el.Seconds(), "records/s")
	b.ReportMetric(float64(after.HeapAlloc-before.HeapAlloc)/float64(keys), "heap-bytes/instance")
	b.ReportMetric(float64(state), "state-bytes/instance")
	close(stop)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	if err := t.stopAll(ctx); err != nil {
		b.Fatal(err)
	}
	wg.Wait()
}
