package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
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

// publishRetry publishes recs through JetStream on a connection that
// reconnects forever, retrying each record until the stream acknowledges
// it, with a message ID per record so that a retry after a lost
// acknowledgement is not stored twice (the stream's duplicate window).
func publishRetry(t *testing.T, url, subject string, recs [][]byte, first int) {
	t.Helper()
	nc, err := nats.Connect(url, nats.MaxReconnects(-1), nats.ReconnectWait(50*time.Millisecond), nats.RetryOnFailedConnect(true))
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(60 * time.Second)
	for i, r := range recs {
		for {
			ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
			_, err := js.Publish(ctx, subject, r, jetstream.WithMsgID(strconv.Itoa(first+i)))
			cancel()
			if err == nil {
				break
			}
			if time.Now().After(deadline) {
				t.Fatalf("record %d not acknowledged: %v", first+i, err)
			}
			time.Sleep(20 * time.Millisecond)
		}
	}
}

// TestDurableBusRestart restarts an external NATS server (the one go.mod
// pins, in process, on the same port and JetStream store) twice while
// records are published: the daemon reports not ready while the server is
// away and ready after, and ends with every record applied exactly once
// and the same model, bit for bit, as a daemon on a server that never went
// away. Source: the durability rules of README.md, "Durability", no
// external source.
func TestDurableBusRestart(t *testing.T) {
	const n = 5000
	recs := sparseTruth(8).records(n, true, 13)
	subject := durableModel().Subject

	refSrv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, durableConfig(t, refSrv.ClientURL(), t.TempDir()), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishAcked(t, refSrv.ClientURL(), subject, recs)
	waitApplied(t, ref, "durable", n)
	want := snapshotLadder(t, ref.byName["durable"])

	port := freePort(t)
	store := t.TempDir()
	url := fmt.Sprintf("nats://127.0.0.1:%d", port)
	srv := runServer(t, port, store)
	td := startDaemon(t, durableConfig(t, url, t.TempDir()), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	cuts := []int{1500, 3200}
	from := 0
	for _, cut := range append(cuts, n) {
		publishRetry(t, url, subject, recs[from:cut], from)
		from = cut
		if cut == n {
			break
		}
		srv.Shutdown()
		srv.WaitForShutdown()
		natstest.WaitFor(t, 10*time.Second, func() error {
			if err := td.Ready(); err == nil {
				return errors.New("ready while the server is down")
			}
			return nil
		})
		srv = runServer(t, port, store)
		natstest.WaitFor(t, 20*time.Second, td.Ready)
	}
	waitApplied(t, td, "durable", n)
	cnt, pos := applied(t, td, "durable")
	if cnt != n || pos != n {
		t.Errorf("applied %d records up to position %d, want %d exactly once", cnt, pos, n)
	}
	if err := sameBits(want, snapshotLadder(t, td.byName["durable"])); err != nil {
		t.Errorf("after two server restarts the model differs from the uninterrupted one: %v", err)
	}
	if got := metricValue(t, td.Daemon, "lariat_nats_reconnects_total", nil); got < 2 {
		t.Errorf("lariat_nats_reconnects_total %v after two server restarts", got)
	}
}

// TestDurableRetentionSkip: when the stream's retention (here 1 MiB) has
// discarded records the model never applied, the restart says how many it
// skipped, counts them in lariat_intake_skipped_total, and applies the
// rest: skipped + applied = published, nothing crashes.
func TestDurableRetentionSkip(t *testing.T) {
	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	subject := durableModel().Subject
	dir := t.TempDir()
	cfg := durableConfig(t, url, dir)
	cfg.Intake.MaxBytes = 1 << 20
	td := startDaemon(t, cfg, withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	recs := sparseTruth(8).records(14000, true, 14)
	publishAcked(t, url, subject, recs[:500])
	waitApplied(t, td, "durable", 500)
	if err := td.stop(t); err != nil {
		t.Fatal(err)
	}
	publishAcked(t, url, subject, recs[500:]) // more than 1 MiB while lariat is down
	var logs syncBuffer
	td = startDaemon(t, cfg, withoutIdle(), WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	waitApplied(t, td, "durable", uint64(len(recs)))
	cnt, _ := applied(t, td, "durable")
	skipped := metricValue(t, td.Daemon, "lariat_intake_skipped_total", map[string]string{"model": "durable"})
	t.Logf("published %d, applied %d, skipped %v", len(recs), cnt, skipped)
	if skipped < 1 || float64(cnt)+skipped != float64(len(recs)) {
		t.Errorf("applied %d + skipped %v, want %d with some skipped", cnt, skipped, len(recs))
	}
	if s := logs.String(); !strings.Contains(s, "records lost before they were applied") {
		t.Errorf("the skip is not logged:\n%s", s)
	}
}

// TestDurableStreamReplaced: a server whose JetStream store was replaced
// (the stream gone) holds fewer records than the model's checkpoint
// applied; the restart says so and reads the new stream from its first
// record instead of waiting past a position that means nothing there.
func TestDurableStreamReplaced(t *testing.T) {
	port := freePort(t)
	url := fmt.Sprintf("nats://127.0.0.1:%d", port)
	subject := durableModel().Subject
	dir := t.TempDir()
	recs := sparseTruth(8).records(1500, true, 15)
	srv := runServer(t, port, t.TempDir())
	td := startDaemon(t, durableConfig(t, url, dir), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	publishAcked(t, url, subject, recs[:1000])
	waitApplied(t, td, "durable", 1000)
	if err := td.stop(t); err != nil {
		t.Fatal(err)
	}
	srv.Shutdown()
	srv.WaitForShutdown()
	runServer(t, port, t.TempDir()) // a new, empty store
	var logs syncBuffer
	td = startDaemon(t, durableConfig(t, url, dir), withoutIdle(), WithLogger(slog.New(slog.NewTextHandler(&logs, nil))))
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	publishAcked(t, url, subject, recs[1000:])
	natstest.WaitFor(t, 20*time.Second, func() error {
		if n, _ := applied(t, td, "durable"); n < 1500 {
			return fmt.Errorf("applied %d of 1500", n)
		}
		return nil
	})
	if n, pos := applied(t, td, "durable"); n != 1500 || pos != 500 {
		t.Errorf("applied %d records, position %d in the new stream; want 1500 and 500", n, pos)
	}
	if s := logs.String(); !strings.Contains(s, "behind its checkpoint") {
		t.Errorf("the replaced stream is not logged:\n%s", s)
	}
}
