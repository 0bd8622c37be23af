package daemon

import (
	"context"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/sink/natstest"
)

// durableModel is the model of the durable tests: a logistic model with a
// small window so that retunes, drift checks and evictions all happen
// across the restarts, and checkpoints every 700 records.
func durableModel() config.Model {
	m := testModel("durable", "test.durable", config.LossLogistic)
	m.Window.Records = 1500
	m.Holdout.Records = 400
	m.Retune.Every = 250
	return m
}

// durableConfig is the configuration of one daemon of the durable tests,
// against the external server at url, with its own data_dir.
func durableConfig(t *testing.T, url, dataDir string) *config.Config {
	t.Helper()
	cfg := testConfigMode(t, config.IntakeDurable, durableModel())
	cfg.NATS.URL = url
	cfg.DataDir = dataDir
	cfg.Checkpoint.Records = 700
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return cfg
}

// publishAcked publishes recs on subject through JetStream, each one
// acknowledged by the stream before the next.
func publishAcked(t *testing.T, url, subject string, recs [][]byte) {
	t.Helper()
	nc := connect(t, url)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	for i, r := range recs {
		if _, err := js.Publish(ctx, subject, r); err != nil {
			t.Fatalf("record %d: %v", i, err)
		}
	}
}

// applied returns the records the model applied or rejected, read on the
// model goroutine, and the model's stream position.
func applied(t *testing.T, td *testDaemon, name string) (n, pos uint64) {
	t.Helper()
	w := td.byName[name]
	if !w.exec(func() { n, _ = w.pipe.Counts(); pos = w.pipe.Position() }) {
		t.Fatal("model goroutine stopped")
	}
	return n, pos
}

// waitApplied waits until the model's stream position reaches pos.
func waitApplied(t *testing.T, td *testDaemon, name string, pos uint64) {
	t.Helper()
	natstest.WaitFor(t, 30*time.Second, func() error {
		if _, p := applied(t, td, name); p < pos {
			return fmt.Errorf("position %d of %d", p, pos)
		}
		return nil
	})
}

// TestDurableRestart stops and restarts a daemon twice while records keep
// arriving (some published while it is down), then compares its model bit
// for bit with a daemon that ran once over the same records: every record
// is applied exactly once across the restarts, the version keeps rising,
// and the restored model is served before any new record arrives. Idle
// steps are off (they depend on wall time). Source: the durability rules of
// README.md, "Durability", no external source.
func TestDurableRestart(t *testing.T) {
	const n = 6000
	recs := sparseTruth(8).records(n, true, 11)
	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	subject := durableModel().Subject

	// The daemon that never stops, on a server of its own.
	refSrv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, durableConfig(t, refSrv.ClientURL(), t.TempDir()), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishAcked(t, refSrv.ClientURL(), subject, recs)
	waitApplied(t, ref, "durable", n)
	want := snapshotLadder(t, ref.byName["durable"])

	dir := t.TempDir()
	cuts := []int{1700, 3900} // restarts after these records
	var lastVersion uint64
	from := 0
	for round := 0; round <= len(cuts); round++ {
		td := startDaemon(t, durableConfig(t, url, dir), withoutIdle())
		natstest.WaitFor(t, 10*time.Second, td.Ready)
		if round > 0 {
			// Restored and served before any new record: the version
			// continues from the one before the stop.
			doc, _, err := getDoc(td.Daemon, "durable")
			if err != nil || doc.Version <= lastVersion {
				t.Fatalf("round %d: served %v (%v) at start, want a version above %d", round, doc, err, lastVersion)
			}
		}
		to := n
		if round < len(cuts) {
			to = cuts[round]
		}
		publishAcked(t, url, subject, recs[from:(from+to)/2])
		// The second half of each round arrives while the daemon stops
		// (or, for the last round, while it runs).
		if round < len(cuts) {
			waitApplied(t, td, "durable", uint64((from+to)/2))
			if err := td.stop(t); err != nil {
				t.Fatal(err)
			}
			doc, _ := td.store.Model("durable")
			lastVersion = doc.Version
			publishAcked(t, url, subject, recs[(from+to)/2:to])
		} else {
			publishAcked(t, url, subject, recs[(from+to)/2:to])
			waitApplied(t, td, "durable", n)
			got := snapshotLadder(t, td.byName["durable"])
			if err := sameBits(want, got); err != nil {
				t.Errorf("after %d restarts the model differs from the uninterrupted one: %v", len(cuts), err)
			}
			cnt, pos := applied(t, td, "durable")
			if cnt != n || pos != n {
				t.Errorf("applied %d records up to position %d, want %d exactly once", cnt, pos, n)
			}
			if c := metricValue(t, td.Daemon, "lariat_checkpoints_total", map[string]string{"model": "durable", "result": "restored"}); c != 1 {
				t.Errorf("restored %v times in the last round, want 1", c)
			}
		}
		from = to
	}
	files, _ := filepath.Glob(filepath.Join(dir, checkpointDir, "durable*.ckpt"))
	if len(files) != 2 {
		t.Errorf("checkpoint files %v, want the newest two", files)
	}
}

// TestDurableBadCheckpoint damages the newest checkpoint of a stopped
// daemon: the next start refuses it with the reason, restores the one
// before it, reads the stream from that one's position, and ends with
// every record applied once.
func TestDurableBadCheckpoint(t *testing.T) {
	const n = 3000
	recs := sparseTruth(8).records(n, true, 12)
	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	subject := durableModel().Subject
	dir := t.TempDir()
	td := startDaemon(t, durableConfig(t, url, dir), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	publishAcked(t, url, subject, recs[:2000])
	waitApplied(t, td, "durable", 2000)
	if err := td.stop(t); err != nil {
		t.Fatal(err)
	}
	newest := filepath.Join(dir, checkpointDir, "durable.ckpt")
	b, err := os.ReadFile(newest)
	if err != nil {
		t.Fatal(err)
	}
	b[len(b)/2] ^= 0xff
	if err := os.WriteFile(newest, b, 0o600); err != nil {
		t.Fatal(err)
	}
	var logs syncBuffer
	td = startDaemon(t, durableConfig(t, url, dir), withoutIdle(), WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	publishAcked(t, url, subject, recs[2000:])
	waitApplied(t, td, "durable", n)
	if cnt, _ := applied(t, td, "durable"); cnt != n {
		t.Errorf("applied %d records, want %d", cnt, n)
	}
	if c := metricValue(t, td.Daemon, "lariat_checkpoints_total", map[string]string{"model": "durable", "result": "refused"}); c != 1 {
		t.Errorf("refused %v checkpoints, want 1", c)
	}
	if s := logs.String(); !strings.Contains(s, "checkpoint refused") || !strings.Contains(s, "payload checksum") {
		t.Errorf("log does not name the refused checkpoint and why:\n%s", s)
	}
}
