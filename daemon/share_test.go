package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"os"
	"slices"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/sink/checkpoint"
	"lariat/sink/natstest"
)

// sharedConfig is one process's configuration of the shared template
// tests: the trip template in parts partitions with a takeover of 2 s,
// checkpoints in the shared bucket every 50 records of an instance or
// every second.
func sharedConfig(t testing.TB, url string, parts, replicas int) *config.Config {
	t.Helper()
	m := tripTemplate(0)
	m.Instances.Takeover = config.Duration(2 * time.Second)
	cfg := templateConfig(t, url, t.TempDir(), m)
	cfg.Models[0].Instances.Partitions = parts
	cfg.Checkpoint.Store = config.CheckpointBucket
	cfg.Checkpoint.Records = 50
	cfg.Checkpoint.Interval = config.Duration(time.Second)
	cfg.Checkpoint.Replicas = replicas
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return cfg
}

// holders returns, for each partition of the trip template, the indexes
// of the daemons (nil ones are skipped) that hold it.
func holders(ds []*Daemon) [][]int {
	var out [][]int
	for i, d := range ds {
		if d == nil {
			continue
		}
		tp := d.tmpl["trip"]
		if out == nil {
			out = make([][]int, len(tp.parts))
		}
		for _, pt := range tp.parts {
			if pt.held.Load() {
				out[pt.n] = append(out[pt.n], i)
			}
		}
	}
	return out
}

// balanced returns nil once every process sees every other, and every
// partition is held by exactly one of them, where its view puts it, or
// by none with nothing to apply (a quiet partition handed over).
func balanced(ds []*Daemon) error {
	live := 0
	for _, d := range ds {
		if d != nil {
			live++
		}
	}
	for i, d := range ds {
		if d != nil {
			if v := d.tmpl["trip"].shared.view(); len(v) != live {
				return fmt.Errorf("process %d sees %d members, %d live", i, len(v), live)
			}
		}
	}
	quiet := map[int]bool{}
	for n, hs := range holders(ds) {
		if len(hs) == 0 && idle(ds, n) == nil {
			quiet[n] = true // nothing to apply: taken at its next record
			continue
		}
		if len(hs) != 1 {
			return fmt.Errorf("partition %d held by %v (%v)", n, hs, idle(ds, n))
		}
	}
	for i, d := range ds {
		if d == nil {
			continue
		}
		sh := d.tmpl["trip"].shared
		for _, pt := range d.tmpl["trip"].parts {
			if !quiet[pt.n] && pt.held.Load() != sh.wants(pt.n) {
				return fmt.Errorf("process %d: partition %d held %v, assigned here %v", i, pt.n, pt.held.Load(), !pt.held.Load())
			}
		}
	}
	return nil
}

// idle returns nil if partition n, held by nobody, has nothing to apply:
// no pin, nothing pending and nothing delivered past its index floor.
func idle(ds []*Daemon, n int) error {
	for _, d := range ds {
		if d == nil {
			continue
		}
		tp := d.tmpl["trip"]
		pt := tp.parts[n]
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		info, err := pt.cons.Info(ctx)
		if err != nil {
			return err
		}
		floor, err := tp.indexFloor(pt)
		if err != nil {
			return err
		}
		if pinnedID(info) != "" || info.NumPending > 0 || info.Delivered.Stream > floor {
			return fmt.Errorf("pinned %q, %d pending, delivered %d, floor %d", pinnedID(info), info.NumPending, info.Delivered.Stream, floor)
		}
		return nil
	}
	return errors.New("no process")
}

// holderOf returns the daemon holding key's instance (its partition held
// and the key known there), or an error unless exactly one does.
func holderOf(ds []*Daemon, key string) (*Daemon, error) {
	var got []*Daemon
	for _, d := range ds {
		if d == nil {
			continue
		}
		tp := d.tmpl["trip"]
		tp.mu.Lock()
		in := tp.inst[key]
		if in != nil && in.p.held.Load() {
			got = append(got, d)
		}
		tp.mu.Unlock()
	}
	if len(got) != 1 {
		return nil, fmt.Errorf("key %s held by %d processes", key, len(got))
	}
	return got[0], nil
}

// waitKeys waits until every key's instance, in the one process that
// holds it, has applied as many records as were published for it.
func waitKeys(t *testing.T, ds []*Daemon, kr keyedRecords, within time.Duration) {
	t.Helper()
	natstest.WaitFor(t, within, func() error {
		for _, k := range kr.keys {
			d, err := holderOf(ds, k)
			if err != nil {
				return err
			}
			w, ok := d.tmpl["trip"].lookup(k)
			if !ok {
				return fmt.Errorf("key %s not loaded", k)
			}
			var n uint64
			if !w.exec(func() { n, _ = w.pipe.Counts() }) {
				return fmt.Errorf("key %s stopped", k)
			}
			if n != uint64(kr.per[k]) || len(w.queue) > 0 {
				return fmt.Errorf("key %s applied %d of %d", k, n, kr.per[k])
			}
		}
		return nil
	})
}

// checkShared compares every key's instance, in the process that holds
// it, with the reference process's: each record applied once, the ladder
// bit-identical.
func checkShared(t *testing.T, ds []*Daemon, ref *Daemon, kr keyedRecords) {
	t.Helper()
	for _, k := range kr.keys {
		d, err := holderOf(ds, k)
		if err != nil {
			t.Error(err)
			continue
		}
		n, ms := instanceState(t, d, "trip", k)
		rn, rms := instanceState(t, ref, "trip", k)
		if n != uint64(kr.per[k]) || rn != n {
			t.Errorf("instance %s applied %d records (reference %d), published %d", k, n, rn, kr.per[k])
		}
		if err := sameBits(rms, ms); err != nil {
			t.Errorf("instance %s differs from the reference: %v", k, err)
		}
	}
}

// sharedRun is one run of the shared-partition scenario: three processes
// (urls[i] is the server process i connects to) share a 50-key template in
// parts partitions; two start, the third joins while records flow, then
// the first dies mid-stream (connection closed, nothing it would write
// afterwards reaches the store), with records flowing or (quiet) after
// it pulled every record stored and before any other is published; then
// the third shuts down while records flow.
type sharedRun struct {
	// measured: a join, a death and a shutdown to the partitions balanced
	join, takeover, leave time.Duration
}

func runShared(t *testing.T, urls []string, parts, replicas int, quiet bool, ref *Daemon, kr keyedRecords) sharedRun {
	t.Helper()
	n := len(kr.data)
	var dead atomic.Bool
	a, err := New(sharedConfig(t, urls[0], parts, replicas), withoutIdle(), dbg("A"))
	if err != nil {
		t.Fatal(err)
	}
	a.ckptWrap = func(s checkpoint.Store) checkpoint.Store { return deadStore{s, &dead} }
	ta := runDaemon(t, a)
	// One after the other, as a deployment starts them: two processes
	// creating the same replicated assets at once can wait on each other
	// for seconds on a fresh cluster.
	natstest.WaitFor(t, 30*time.Second, a.Ready)
	tb := startDaemon(t, sharedConfig(t, urls[1], parts, replicas), withoutIdle(), dbg("B"))
	natstest.WaitFor(t, 30*time.Second, tb.Ready)
	ds := []*Daemon{a, tb.Daemon, nil}
	natstest.WaitFor(t, 10*time.Second, func() error { // each sees the other
		for _, d := range ds[:2] {
			if m := d.tmpl["trip"].shared.view(); len(m) != 2 {
				return fmt.Errorf("members %v", m)
			}
		}
		return nil
	})
	publishKeyed(t, urls[2], kr, 0, n/3)
	natstest.WaitFor(t, 30*time.Second, func() error { return balanced(ds) })

	// C joins while the second third is published.
	var res sharedRun
	pubDone := make(chan struct{})
	go func() { defer close(pubDone); publishPaced(t, urls[2], kr, n/3, 2*n/3, 2*time.Millisecond) }()
	t0 := time.Now()
	tc := startDaemon(t, sharedConfig(t, urls[2], parts, replicas), withoutIdle(), dbg("C"))
	ds[2] = tc.Daemon
	natstest.WaitFor(t, 30*time.Second, func() error { return balanced(ds) })
	res.join = time.Since(t0)
	t.Logf("join: partitions %v balanced %v after the third process started", holders(ds), res.join.Round(time.Millisecond))
	<-pubDone

	// Every partition of A has a checkpoint in the bucket, then A dies
	// while the last third is published.
	natstest.WaitFor(t, 30*time.Second, func() error {
		for _, pt := range a.tmpl["trip"].parts {
			if pt.held.Load() {
				if _, _, _, err := a.ckpt.Load(pt.index); err != nil {
					return err
				}
			}
		}
		return nil
	})
	if len(a.tmpl["trip"].heldParts()) == 0 {
		t.Fatal("the first process holds no partition")
	}
	pubDone = make(chan struct{})
	if quiet {
		// The records are stored and A has pulled them before it dies,
		// and none follow until its partitions are taken: their takeover
		// needs no new record.
		publishKeyed(t, urls[2], kr, 2*n/3, 5*n/6)
		time.Sleep(300 * time.Millisecond)
		close(pubDone)
	} else {
		go func() { defer close(pubDone); publishPaced(t, urls[2], kr, 2*n/3, 5*n/6, 4*time.Millisecond) }()
		time.Sleep(50 * time.Millisecond) // records in flight when A dies
	}
	dead.Store(true)
	a.nc.Close()
	t0 = time.Now()
	stopped := make(chan struct{})
	go func() { defer close(stopped); ta.stop(t) }() // its shutdown fails to write anything
	ds[0] = nil
	natstest.WaitFor(t, 30*time.Second, func() error { return balanced(ds) })
	res.takeover = time.Since(t0)
	t.Logf("takeover: partitions %v balanced %v after the first process died", holders(ds), res.takeover.Round(time.Millisecond))
	<-pubDone
	checkReadyz(t, ds)

	// C shuts down while the rest is published: it hands its partitions
	// over (applies, saves, unpins) and B takes them.
	pubDone = make(chan struct{})
	go func() { defer close(pubDone); publishPaced(t, urls[1], kr, 5*n/6, n, 4*time.Millisecond) }()
	time.Sleep(50 * time.Millisecond)
	t0 = time.Now()
	if err := tc.stop(t); err != nil {
		t.Errorf("the third process's shutdown: %v", err)
	}
	ds[2] = nil
	natstest.WaitFor(t, 30*time.Second, func() error { return balanced(ds) })
	res.leave = time.Since(t0)
	t.Logf("shutdown: partitions %v balanced %v after the third process was told to stop", holders(ds), res.leave.Round(time.Millisecond))
	<-pubDone
	waitKeys(t, ds, kr, 60*time.Second)
	checkShared(t, ds, ref, kr)
	<-stopped
	return res
}

// checkReadyz checks that /readyz lists the partitions each process
// holds.
func checkReadyz(t *testing.T, ds []*Daemon) {
	t.Helper()
	for i, d := range ds {
		if d == nil {
			continue
		}
		resp, err := http.Get("http://" + d.HTTPAddr() + "/readyz")
		if err != nil {
			t.Fatal(err)
		}
		var r struct {
			Status     string
			Partitions map[string][]int
		}
		err = json.NewDecoder(resp.Body).Decode(&r)
		resp.Body.Close()
		if want := d.tmpl["trip"].heldParts(); err != nil || r.Status != "ready" || !slices.Equal(r.Partitions["trip"], want) {
			t.Errorf("process %d: /readyz %+v (%v), holds %v", i, r, err, want)
		}
	}
}

// TestSharedPartitions: a 50-key template in 6 partitions shared by three
// processes on one NATS server (the cluster test is TestSharedCluster);
// one joins mid-stream, one dies after it pulled every record stored (its
// partitions are taken with no new record), one shuts down mid-stream.
// Every instance ends with each of its records applied exactly once and
// bit-identical to a single process over the same records; the
// partitions are rebalanced within 10 s of the join, the death and the
// shutdown (takeover 2 s). Source: the rules of
// README "Running more than one", no external source.
func TestSharedPartitions(t *testing.T) {
	if testing.Short() {
		t.Skip("shared partitions: four daemons over 4,000 records with a 2 s takeover")
	}
	kr := makeKeyed(50, 80, 500)
	ref := referenceRun(t, kr)
	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	res := runShared(t, []string{url, url, url}, 6, 1, true, ref, kr)
	for what, d := range map[string]time.Duration{"join": res.join, "takeover": res.takeover, "shutdown": res.leave} {
		if d > 10*time.Second {
			t.Errorf("%s took %v, want at most 10 s", what, d)
		}
	}
}

// TestSharedCluster: the scenario of TestSharedPartitions on a three-node
// NATS cluster (natstest.RunCluster), each process connected to another
// node, the stream, the partition consumers, the members bucket and the
// checkpoint bucket held by three servers (replicas 3): 50 keys, 6
// partitions, one process joins, one dies and one shuts down mid-stream,
// records flowing; every instance
// ends bit-identical to a single process over the same per-key records,
// each record applied once, and the partitions are rebalanced within
// 10 s of each (takeover 2 s). Source: the rules of README "Running more
// than one", no external source.
func TestSharedCluster(t *testing.T) {
	if testing.Short() {
		t.Skip("cluster: three NATS servers, four daemons, 4,000 records, a 2 s takeover")
	}
	kr := makeKeyed(50, 80, 700)
	ref := referenceRun(t, kr)
	c := natstest.RunCluster(t, 3)
	res := runShared(t, c.URLs(), 6, 3, false, ref, kr)
	for what, d := range map[string]time.Duration{"join": res.join, "takeover": res.takeover, "shutdown": res.leave} {
		if d > 10*time.Second {
			t.Errorf("%s took %v, want at most 10 s", what, d)
		}
	}
}

// referenceRun applies every record in one process with one partition.
func referenceRun(t *testing.T, kr keyedRecords) *Daemon {
	t.Helper()
	srv := runServer(t, -1, t.TempDir())
	ref := startDaemon(t, templateConfig(t, srv.ClientURL(), t.TempDir(), tripTemplate(0)), withoutIdle())
	natstest.WaitFor(t, 10*time.Second, ref.Ready)
	publishKeyed(t, srv.ClientURL(), kr, 0, len(kr.data))
	waitRead(t, ref.Daemon, "trip", uint64(len(kr.data)))
	return ref.Daemon
}

// dbg logs the daemon's lines at info to stderr, marked with name, when
// LARIAT_DEBUG_LOG is set (the shared tests are quiet otherwise).
func dbg(name string) Option {
	return func(d *Daemon) error {
		if os.Getenv("LARIAT_DEBUG_LOG") != "" {
			d.log = slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelInfo})).With("proc", name)
		}
		return nil
	}
}

// publishPaced publishes records [from, to) as publishKeyed does, one
// every pace at most (records keep arriving while partitions move).
func publishPaced(t *testing.T, url string, kr keyedRecords, from, to int, pace time.Duration) {
	t.Helper()
	for i := from; i < to; i += 10 {
		publishKeyed(t, url, kr, i, min(i+10, to))
		time.Sleep(10 * pace)
	}
}

// TestAssign: every partition goes to a member, no member gets more than
// ⌈P/N⌉, and the result does not depend on the order the members were
// read in (every process with the same view computes the same). Source:
// rendezvous hashing (Thaler & Ravishankar 1998) with bounded loads
// (Mirrokni, Thorup & Zadimoghaddam 2018); the properties are checked,
// not values.
func TestAssign(t *testing.T) {
	for _, c := range []struct {
		members []string
		parts   int
	}{
		{[]string{"a"}, 6},
		{[]string{"a", "b"}, 6},
		{[]string{"a", "b", "c"}, 6},
		{[]string{"0123abcd", "4567ef01", "89ab2345", "cdef6789"}, 12},
		{[]string{"m1", "m2", "m3", "m4", "m5", "m6", "m7", "m8"}, 24},
		{[]string{"a", "b", "c"}, 2}, // fewer partitions than members
	} {
		t.Run(fmt.Sprintf("%d members, %d partitions", len(c.members), c.parts), func(t *testing.T) {
			got := assign(c.members, c.parts)
			limit := (c.parts + len(c.members) - 1) / len(c.members)
			load := map[string]int{}
			for n, m := range got {
				if !slices.Contains(c.members, m) {
					t.Fatalf("partition %d assigned to %q", n, m)
				}
				load[m]++
			}
			for m, l := range load {
				if l > limit {
					t.Errorf("member %s has %d partitions, bound %d", m, l, limit)
				}
			}
			rev := slices.Clone(c.members)
			slices.Reverse(rev)
			if again := assign(rev, c.parts); !slices.Equal(again, got) {
				t.Errorf("order of the members changes the assignment: %v, %v", got, again)
			}
		})
	}
}

// TestTransform: the stream's subject transform puts the server's
// partition() of the key wildcard in front of the subject. Source: the
// NATS server's subject mapping functions (nats-server v2.15.2,
// server/subject_transform.go: partition(n, wildcard indexes...)).
func TestTransform(t *testing.T) {
	for _, c := range []struct {
		subject  string
		token    int
		parts    int
		wantDest string
	}{
		{"plant.*.trip", 2, 6, "{{partition(6,1)}}.plant.{{wildcard(1)}}.trip"},
		{"site.*.pump.*.trip", 4, 12, "{{partition(12,2)}}.site.{{wildcard(1)}}.pump.{{wildcard(2)}}.trip"},
	} {
		m := config.Model{Subject: c.subject, Instances: config.Instances{KeyToken: c.token, Partitions: c.parts}}
		tr := transform(&m)
		if tr.Source != c.subject || tr.Destination != c.wantDest {
			t.Errorf("%s: transform %s -> %s, want -> %s", c.subject, tr.Source, tr.Destination, c.wantDest)
		}
	}
}

// TestSharedUnpinned: the server's pins of a running process's partitions
// are taken away from outside (UnpinConsumer, as an operator or a
// consumer's new leader would) five times while records flow. Each time
// the process finds its pin refused, drops the partition without a
// checkpoint (its queued records dropped), is pinned anew and takes the
// partition back from the checkpoints; every instance still ends with
// each record applied once and bit-identical to the reference. Source:
// the rules of README "Running more than one", no external source.
func TestSharedUnpinned(t *testing.T) {
	if testing.Short() {
		t.Skip("shared partitions: 2,000 records paced over seconds, pins taken away")
	}
	kr := makeKeyed(20, 100, 1100)
	ref := referenceRun(t, kr)
	srv := runServer(t, -1, t.TempDir())
	url := srv.ClientURL()
	a := startDaemon(t, sharedConfig(t, url, 3, 1), withoutIdle(), dbg("A"))
	natstest.WaitFor(t, 30*time.Second, a.Ready)
	pubDone := make(chan struct{})
	go func() { defer close(pubDone); publishPaced(t, url, kr, 0, len(kr.data), 2*time.Millisecond) }()
	js, err := jetstream.New(connect(t, url))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	st, err := js.Stream(ctx, "lariat_trip")
	if err != nil {
		t.Fatal(err)
	}
	for range 5 {
		time.Sleep(500 * time.Millisecond)
		for n := range 3 {
			if err := st.UnpinConsumer(ctx, fmt.Sprintf("trip_part_%d", n), pinGroup); err != nil {
				t.Logf("unpin partition %d: %v", n, err)
			}
		}
	}
	<-pubDone
	waitKeys(t, []*Daemon{a.Daemon}, kr, 60*time.Second)
	checkShared(t, []*Daemon{a.Daemon}, ref, kr)
	if n := metricValue(t, a.Daemon, "lariat_template_partition_takeovers_total", map[string]string{"template": "trip"}); n <= 3 {
		t.Errorf("%v partitions taken, want more than the first 3 (the pins were taken away)", n)
	}
}
