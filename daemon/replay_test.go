package daemon

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/replay"
	"lariat/online"
	"lariat/sink/natstest"
)

// TestReplayMatchesDaemon publishes the bundled recording on a model's
// subject with core intake and no idle steps, and checks that lariat
// replay's pipeline ends with the same ladder, bit for bit: the two run
// the same code on the same records (with "t", so the same cooldown clock).
func TestReplayMatchesDaemon(t *testing.T) {
	if testing.Short() {
		t.Skip("publishes 6000 records")
	}
	const file = "../testdata/demo-stream.jsonl"
	demo, err := config.Demo()
	if err != nil {
		t.Fatal(err)
	}
	dm, ok := demo.Model("bearing-temp")
	if !ok {
		t.Fatal("no bearing-temp in the demo configuration")
	}
	m := *dm
	m.Subject = "replay.bearing"
	m.Window.Records = 2000
	m.Queue = 8192 // more than the recording: core intake never overflows
	cfg := testConfigMode(t, config.IntakeCore, m)
	td := startDaemon(t, cfg, withoutIdle())

	lines := readLines(t, file)
	nc := connect(t, td.NATSURL())
	for _, l := range lines {
		if err := nc.Publish(m.Subject, l); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	natstest.WaitFor(t, 60*time.Second, func() error {
		if n, _ := applied(t, td, m.Name); n < uint64(len(lines)) {
			return fmt.Errorf("applied %d of %d", n, len(lines))
		}
		return nil
	})

	res, err := replay.Run(file, replay.Options{Model: &cfg.Models[0]})
	if err != nil {
		t.Fatal(err)
	}
	if res.Applied != len(lines) || res.Rejected != 0 {
		t.Fatalf("replay applied %d, rejected %d of %d", res.Applied, res.Rejected, len(lines))
	}
	l := res.Pipeline().Ladder()
	var want []online.Model
	for i := range l.Size() {
		want = append(want, l.Model(i))
	}
	w := td.byName[m.Name]
	if err := sameBits(snapshotLadder(t, w), want); err != nil {
		t.Fatalf("daemon and replay differ: %v", err)
	}
	var cur int
	w.exec(func() { cur = w.pipe.Current() })
	if cur != res.Pipeline().Current() {
		t.Errorf("λ* index: daemon %d, replay %d", cur, res.Pipeline().Current())
	}
}

// readLines returns the file's non-empty lines.
func readLines(t *testing.T, file string) [][]byte {
	t.Helper()
	f, err := os.Open(file)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out [][]byte
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		if b := bytes.TrimSpace(sc.Bytes()); len(b) > 0 {
			out = append(out, bytes.Clone(b))
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}
