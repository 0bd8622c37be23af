package daemon

import (
	"errors"
	"sync/atomic"
	"testing"
	"time"

	"lariat/config"
	"lariat/sink/checkpoint"
	"lariat/sink/natstest"
)

// deadStore passes through to a checkpoint store until dead is set, then
// refuses every Save: what a process that died leaves behind.
type deadStore struct {
	checkpoint.Store
	dead *atomic.Bool
}

func (s deadStore) Save(model string, frame []byte) error {
	if s.dead.Load() {
		return errors.New("process is dead")
	}
	return s.Store.Save(model, frame)
}

// TestTemplateTakeover: process A keeps a 30-key template with its
// checkpoints in the shared object store (checkpoint.store bucket) and
// dies mid-stream: its connection is closed and nothing it would write
// afterwards reaches the store (no final checkpoints, no final index).
// Process B, another data_dir on the same NATS system, starts the same
// template: it restores each instance's latest checkpoint from the bucket,
// reads the stream from the index floor, skips per instance what the
// checkpoint holds, and ends with every record applied exactly once and
// every instance bit-identical to a process that never died. Source: the
// rules of README "Running more than one", no external source.
func TestTemplateTakeover(t *testing.T) {
	if testing.Short() {
		t.Skip("takeover: two daemons over 2,400 records and a dead process's 10 s shutdown (minutes under -race)")
	}
	keys := 30
	kr := makeKeyed(keys, 80, 300)
	n := len(kr.data)
	m := tripTemplate(0)
	bucketCfg := func(url string) *config.Config {
		cfg := templateConfig(t, url, t.TempDir(), m)
		cfg.Checkpoint.Store = config.CheckpointBucket
		cfg.Checkpoint.Records = 50
		cfg.Checkpoint.Interval = config.Duration(time.Second)
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		return cfg
	}

	refSrv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, templateConfig(t, refSrv.ClientURL(), t.TempDir(), m), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishKeyed(t, refSrv.ClientURL(), kr, 0, n)
	waitRead(t, ref.Daemon, "trip", uint64(n))

	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	var dead atomic.Bool
	a, err := New(bucketCfg(url), withoutIdle())
	if err != nil {
		t.Fatal(err)
	}
	a.ckptWrap = func(s checkpoint.Store) checkpoint.Store { return deadStore{s, &dead} }
	ta := runDaemon(t, a)
	natstest.WaitFor(t, 10*time.Second, ta.Ready)
	cut := n * 3 / 5
	publishKeyed(t, url, kr, 0, cut/2)
	// Every instance has saved a checkpoint into the bucket (pump03 is
	// checked below) and the template its index, at least once.
	natstest.WaitFor(t, 30*time.Second, func() error {
		if _, _, _, err := a.ckpt.Load(indexName("trip")); err != nil {
			return err
		}
		if metricValue(t, a, "lariat_checkpoints_total", map[string]string{"model": "trip.pump03", "result": "saved"}) < 1 {
			return errors.New("trip.pump03 has no checkpoint yet")
		}
		return nil
	})
	// Then more records, and A dies as soon as they are stored, with the
	// records it applied since its last checkpoints (every 50 records of
	// an instance or every second) and whatever it still holds.
	publishKeyed(t, url, kr, cut/2, cut)
	dead.Store(true)
	a.nc.Close()
	t.Logf("A died having read %d of the %d records stored", a.tmpl["trip"].parts[0].read.Load(), cut)
	if err := ta.stop(t); err == nil {
		t.Log("the dead process stopped without an error")
	}

	publishKeyed(t, url, kr, cut, n) // while nobody reads
	b := startDaemon(t, bucketCfg(url), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, b.Ready)
	waitRead(t, b.Daemon, "trip", uint64(n))
	checkInstances(t, b.Daemon, ref.Daemon, kr)
	if r := metricValue(t, b.Daemon, "lariat_checkpoints_total", map[string]string{"model": "trip.pump03", "result": "restored"}); r != 1 {
		t.Errorf("trip.pump03 restored %v times from the bucket, want 1", r)
	}
}
