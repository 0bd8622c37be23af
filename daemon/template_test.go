package daemon

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/online"
	"lariat/sink/natstest"
)

// tripTemplate is the template of the template tests: a logistic model per
// pump on plant.<pump>.trip, small windows, a checkpoint every 150 records
// of an instance.
func tripTemplate(idle time.Duration) config.Model {
	m := testModel("trip", "plant.*.trip", config.LossLogistic)
	m.Window.Records = 200
	m.Holdout.Records = 50
	m.Retune.Every = 40
	m.Queue = 64
	m.Instances.KeyToken, m.Instances.Max, m.Instances.Idle = 2, 1000, config.Duration(idle)
	return m
}

// templateConfig is one daemon's configuration for the template tests,
// against the external server at url with its own data_dir.
func templateConfig(t testing.TB, url, dataDir string, m config.Model) *config.Config {
	t.Helper()
	cfg := testConfigMode(t, config.IntakeDurable, m)
	cfg.NATS.URL = url
	cfg.DataDir = dataDir
	cfg.Checkpoint.Records = 150
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return cfg
}

// keyedRecords are records for keys pump00..pump<k-1>, perKey each, in a
// fixed interleaving (round robin with a stride, so keys are not in
// lockstep); subj[i] is record i's subject.
type keyedRecords struct {
	keys []string
	subj []string
	data [][]byte
	per  map[string]int
}

func makeKeyed(k, perKey int, seed uint64) keyedRecords {
	kr := keyedRecords{per: map[string]int{}}
	streams := make([][][]byte, k)
	for i := range k {
		kr.keys = append(kr.keys, fmt.Sprintf("pump%02d", i))
		streams[i] = sparseTruth(6).records(perKey, true, seed+uint64(i))
	}
	next := make([]int, k)
	for n, i := 0, 0; n < k*perKey; i = (i + 7) % k {
		if next[i] == perKey {
			i = (i + 1) % k
			continue
		}
		kr.subj = append(kr.subj, "plant."+kr.keys[i]+".trip")
		kr.data = append(kr.data, streams[i][next[i]])
		next[i]++
		kr.per[kr.keys[i]]++
		n++
	}
	return kr
}

// publishKeyed publishes records [from, to) through JetStream, each
// acknowledged before the next.
func publishKeyed(t *testing.T, url string, kr keyedRecords, from, to int) {
	t.Helper()
	nc := connect(t, url)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	for i := from; i < to; i++ {
		if _, err := js.Publish(ctx, kr.subj[i], kr.data[i]); err != nil {
			t.Fatalf("record %d: %v", i, err)
		}
	}
}

// instanceState reads an instance's applied count and its ladder on its
// model goroutine (loading it if it was unloaded).
func instanceState(t *testing.T, d *Daemon, tmpl, key string) (uint64, []online.Model) {
	t.Helper()
	w, ok := d.tmpl[tmpl].lookup(key)
	if !ok {
		t.Fatalf("instance %s.%s unknown", tmpl, key)
	}
	var n uint64
	if !w.exec(func() { n, _ = w.pipe.Counts() }) {
		t.Fatalf("instance %s.%s stopped", tmpl, key)
	}
	return n, snapshotLadder(t, w)
}

// waitRead waits until the template has dispatched stream sequence seq and
// every loaded instance has emptied its queue.
func waitRead(t *testing.T, d *Daemon, tmpl string, seq uint64) {
	t.Helper()
	tp := d.tmpl[tmpl]
	natstest.WaitFor(t, 60*time.Second, func() error {
		if r := tp.parts[0].read.Load(); r < seq {
			return fmt.Errorf("read %d of %d", r, seq)
		}
		for _, w := range tp.workers() {
			if len(w.queue) > 0 || !w.exec(func() {}) {
				return fmt.Errorf("%s has %d queued", w.name, len(w.queue))
			}
		}
		return nil
	})
}

// checkInstances compares every instance with the reference daemon's: the
// same number of records applied (each exactly once) and a bit-identical
// ladder.
func checkInstances(t *testing.T, got, ref *Daemon, kr keyedRecords) {
	t.Helper()
	for _, k := range kr.keys {
		n, ms := instanceState(t, got, "trip", k)
		rn, rms := instanceState(t, ref, "trip", k)
		if n != uint64(kr.per[k]) || rn != n {
			t.Errorf("instance %s applied %d records (reference %d), published %d", k, n, rn, kr.per[k])
		}
		if err := sameBits(rms, ms); err != nil {
			t.Errorf("instance %s differs from the reference: %v", k, err)
		}
	}
}

// TestTemplateRestart: a template over 50 pump keys on a durable stream;
// the daemon is stopped twice mid-stream while records keep being
// published. Every instance applies each of its records exactly once (its
// count equals what was published for its key) and ends bit-identical to
// the same instance in a daemon that never stopped. Source: the rules of
// README "Model templates", no external source.
func TestTemplateRestart(t *testing.T) {
	keys, cuts := 50, []int{1300, 2900, 4000}
	if testing.Short() { // -race -short: fewer keys
		keys, cuts = 15, []int{400, 900, 1200}
	}
	kr := makeKeyed(keys, 80, 100)
	n := len(kr.data)
	m := tripTemplate(0)

	refSrv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, templateConfig(t, refSrv.ClientURL(), t.TempDir(), m), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishKeyed(t, refSrv.ClientURL(), kr, 0, n)
	waitRead(t, ref.Daemon, "trip", uint64(n))

	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	dir := t.TempDir()
	from := 0
	var td *testDaemon
	for round, to := range cuts {
		td = startDaemon(t, templateConfig(t, url, dir, m), withoutIdle())
		natstest.WaitFor(t, 10*time.Second, td.Ready)
		mid := (from + to) / 2
		publishKeyed(t, url, kr, from, mid)
		if round == len(cuts)-1 {
			publishKeyed(t, url, kr, mid, to)
			break
		}
		waitRead(t, td.Daemon, "trip", uint64(mid))
		if err := td.stop(t); err != nil {
			t.Fatal(err)
		}
		publishKeyed(t, url, kr, mid, to) // while it is down
		from = to
	}
	waitRead(t, td.Daemon, "trip", uint64(n))
	checkInstances(t, td.Daemon, ref.Daemon, kr)
	if got := metricValue(t, td.Daemon, "lariat_template_instances", map[string]string{"template": "trip"}); got != float64(keys) {
		t.Errorf("lariat_template_instances = %v, want %d", got, keys)
	}
	doc, _, err := getDoc(td.Daemon, "trip.pump07")
	if err != nil || doc.Model != "trip.pump07" {
		t.Errorf("GET /v1/models/trip.pump07: %v, %v", doc, err)
	}
	if err := td.stop(t); err != nil {
		t.Fatal(err)
	}
	// Saved at the stop: the size of the instance's state is reported.
	if got := metricValue(t, td.Daemon, "lariat_model_state_bytes", map[string]string{"model": "trip.pump07"}); got <= 0 {
		t.Errorf("lariat_model_state_bytes of trip.pump07 = %v, want > 0", got)
	}
}

// TestTemplateUnload: instances silent for 150 ms are checkpointed and
// unloaded between bursts, and loaded back on their next record; they end
// bit-identical to the instances of a daemon that never unloads.
func TestTemplateUnload(t *testing.T) {
	if testing.Short() {
		t.Skip("unload and reload: 1,200 records with a checkpoint at every unload (about 5 s, minutes under -race)")
	}
	kr := makeKeyed(20, 60, 200)
	n := len(kr.data)
	refSrv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, templateConfig(t, refSrv.ClientURL(), t.TempDir(), tripTemplate(0)), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishKeyed(t, refSrv.ClientURL(), kr, 0, n)
	waitRead(t, ref.Daemon, "trip", uint64(n))

	srv := runServer(t, -1, t.TempDir())
	td := startDaemon(t, templateConfig(t, srv.ClientURL(), t.TempDir(), tripTemplate(150*time.Millisecond)), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	tp := td.tmpl["trip"]
	for _, cut := range [][2]int{{0, n / 3}, {n / 3, 2 * n / 3}, {2 * n / 3, n}} {
		publishKeyed(t, srv.ClientURL(), kr, cut[0], cut[1])
		waitRead(t, td.Daemon, "trip", uint64(cut[1]))
		natstest.WaitFor(t, 10*time.Second, func() error {
			if l := len(tp.workers()); l > 0 {
				return fmt.Errorf("%d instances still loaded", l)
			}
			return nil
		})
	}
	if u := metricValue(t, td.Daemon, "lariat_template_unloads_total", map[string]string{"template": "trip"}); u < float64(2*len(kr.keys)) {
		t.Errorf("%v unloads, want at least %d (%d keys, three bursts)", u, 2*len(kr.keys), len(kr.keys))
	}
	checkInstances(t, td.Daemon, ref.Daemon, kr)
}

// TestTemplateRejects: a key that is not a valid instance key, and new
// keys past instances.max, are rejected with their reasons and counted;
// the instances that exist are untouched.
func TestTemplateRejects(t *testing.T) {
	m := tripTemplate(0)
	m.Instances.Max = 3
	srv := runServer(t, -1, t.TempDir())
	td := startDaemon(t, templateConfig(t, srv.ClientURL(), t.TempDir(), m), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	nc := connect(t, srv.ClientURL())
	rejects, err := nc.SubscribeSync("lariat.reject.trip")
	if err != nil {
		t.Fatal(err)
	}
	if err := nc.Flush(); err != nil { // the server has the subscription before any reject
		t.Fatal(err)
	}
	recs := sparseTruth(6).records(10, true, 1)
	kr := keyedRecords{per: map[string]int{}}
	for i, key := range []string{"p1", "p2", "p3", "p4", "_hidden", "p1", strings.Repeat("x", 65), "p5", "p2"} {
		kr.subj = append(kr.subj, "plant."+key+".trip")
		kr.data = append(kr.data, recs[i])
	}
	publishKeyed(t, srv.ClientURL(), kr, 0, len(kr.data))
	waitRead(t, td.Daemon, "trip", uint64(len(kr.data)))
	for reason, want := range map[string]float64{"instances": 2, "key": 2} {
		if got := metricValue(t, td.Daemon, "lariat_records_rejected_total", map[string]string{"model": "trip", "reason": reason}); got != want {
			t.Errorf("rejected %s: %v, want %v", reason, got, want)
		}
	}
	for i := range 4 {
		msg, err := rejects.NextMsg(5 * time.Second)
		if err != nil {
			t.Fatalf("reject %d: %v", i, err)
		}
		if r := msg.Header.Get("Lariat-Reason"); r != "instances" && r != "key" {
			t.Errorf("reject reason %q", r)
		}
	}
	for key, want := range map[string]uint64{"p1": 2, "p2": 2, "p3": 1} {
		if n, _ := instanceState(t, td.Daemon, "trip", key); n != want {
			t.Errorf("instance %s applied %d, want %d", key, n, want)
		}
	}
	if _, ok := td.tmpl["trip"].lookup("p4"); ok {
		t.Error("p4 exists past instances.max")
	}
}

// TestTemplateCore: with core intake the template subscribes its subject
// and each key's records reach its own instance (at most once: nothing is
// published while the daemon is down here).
func TestTemplateCore(t *testing.T) {
	m := tripTemplate(0)
	cfg := testConfigMode(t, config.IntakeCore, m)
	td := startDaemon(t, cfg, withoutIdle())
	natstest.WaitFor(t, 10*time.Second, td.Ready)
	nc := connect(t, td.NATSURL())
	kr := makeKeyed(3, 40, 400)
	for i := range kr.data {
		if err := nc.Publish(kr.subj[i], kr.data[i]); err != nil {
			t.Fatal(err)
		}
	}
	if err := nc.Flush(); err != nil {
		t.Fatal(err)
	}
	natstest.WaitFor(t, 20*time.Second, func() error {
		for _, k := range kr.keys {
			if _, ok := td.tmpl["trip"].lookup(k); !ok {
				return fmt.Errorf("instance %s not created yet", k)
			}
			if n, _ := instanceState(t, td.Daemon, "trip", k); n != uint64(kr.per[k]) {
				return fmt.Errorf("instance %s applied %d of %d", k, n, kr.per[k])
			}
		}
		return nil
	})
}
