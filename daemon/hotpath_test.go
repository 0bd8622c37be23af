package daemon

import (
	"testing"

	"github.com/nats-io/nats.go"

	"lariat/config"
)

// TestHotPathAllocs checks that the per-record path, intake (decode and
// enqueue) plus apply on the model goroutine (holdout or ladder, metrics),
// allocates nothing once the feature names are learned. The daemon is built
// but not run; the test plays both goroutines.
func TestHotPathAllocs(t *testing.T) {
	for _, loss := range []string{config.LossSquared, config.LossLogistic} {
		t.Run(loss, func(t *testing.T) {
			m := testModel("allocs", "test.allocs", loss)
			m.Retune.Every = 1 << 30 // retuning scores the ladder: not per record
			d, err := New(testConfig(t, m))
			if err != nil {
				t.Fatal(err)
			}
			w := d.byName["allocs"]
			msgs := sparseTruth(8).records(64, loss == config.LossLogistic, 9)
			i := 0
			step := func() {
				w.intake(&nats.Msg{Subject: "test.allocs", Data: msgs[i%len(msgs)]})
				i++
				w.apply(<-w.queue)
			}
			for range 100 { // learn the names, fill buffers
				step()
			}
			// The *nats.Msg above is the client's allocation, not ours;
			// build them first so only the path is measured.
			pre := make([]*nats.Msg, 2000)
			for k := range pre {
				pre[k] = &nats.Msg{Subject: "test.allocs", Data: msgs[k%len(msgs)]}
			}
			k := 0
			allocs := testing.AllocsPerRun(1000, func() {
				w.intake(pre[k])
				k++
				w.apply(<-w.queue)
			})
			if allocs != 0 {
				t.Errorf("%v allocations per record, want 0", allocs)
			}
		})
	}
}
