package daemon

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"hash/fnv"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
)

// share runs the partitions of a template with instances.partitions > 1,
// shared with the other lariat processes that run the same template.
//
// Layout: the template's stream stores each record under
// "<partition>.<subject>", the partition computed by the NATS server's
// deterministic partition() subject mapping of the key token (a stream
// SubjectTransform), and each partition has a durable pull consumer
// filtered on its number, <template>_part_<n>.
//
// Ownership is the server's: each partition consumer has the priority
// policy pinned_client, so the server delivers its records to one pulling
// client at a time and moves the pin to another only when the pinned one
// has not pulled for instances.takeover or unpins on purpose. Each record
// carries the pin id; a process holds a partition from the first record
// with a new pin id until a pull is refused for a wrong pin id (or it
// hands it over). Which processes pull a partition is a matter of
// balance, not of safety: every process keeps a key in a key-value
// bucket (<stream_prefix>_<template>_members, keys expiring after
// instances.takeover) and pulls the partitions that rendezvous hashing
// assigns to it among the live members, plus those it holds; two
// processes with different views both pull, and the server still pins
// one.
//
// On taking a partition the process reads its index from the shared
// checkpoint store, resets the consumer to the index floor + 1 and
// dispatches as an unshared template does (each instance restored from its
// latest checkpoint, a record at or below its checkpoint position
// skipped). Handing over on purpose: stop pulling, let its instances
// apply what they hold and save, save the index, unpin. Before each
// checkpoint or index is written the process asks the server whether its
// pin is still the partition's (mayWrite).
type share struct {
	t      *template
	s      *streamIntake
	stream jetstream.Stream
	kv     jetstream.KeyValue
	self   string        // this process's member id
	ttl    time.Duration // instances.takeover: pinned TTL and member expiry
	wait   time.Duration // the longest pull, and the view's refresh period

	mu      sync.Mutex
	members []string  // the live members, sorted (mu)
	changed time.Time // when the view last changed; zero once settled (mu)
	// assign is the partitions' members under the view assignFor (mu).
	assign, assignFor []string
	// absent counts the reads in a row that missed each member of the
	// view; one is left out after two (a key rewritten while the bucket
	// is listed can be missed once). watch's goroutine only.
	absent map[string]int
}

// setupWait bounds the creation of a shared template's stream,
// consumers and members bucket.
const setupWait = 30 * time.Second

// pinGroup is the priority group of the partition consumers.
const pinGroup = "lariat"

func newShare(t *template) *share {
	id := make([]byte, 8)
	_, _ = rand.Read(id) // crypto/rand never fails on supported platforms
	ttl := t.cfg.Instances.Takeover.Std()
	return &share{t: t, self: hex.EncodeToString(id), ttl: ttl, wait: min(max(ttl/4, 100*time.Millisecond), time.Second)}
}

// consumerName is partition n's consumer.
func (sh *share) consumerName(n int) string { return fmt.Sprintf("%s_part_%d", sh.t.name, n) }

// transform returns the stream's subject transform: the template's subject
// prefixed with partition(P, key wildcard).
func transform(m *config.Model) *jetstream.SubjectTransformConfig {
	toks := strings.Split(m.Subject, ".")
	w := 0
	for i, tok := range toks {
		if tok == "*" {
			w++
			toks[i] = fmt.Sprintf("{{wildcard(%d)}}", w)
		}
	}
	return &jetstream.SubjectTransformConfig{
		Source:      m.Subject,
		Destination: fmt.Sprintf("{{partition(%d,%d)}}.", m.Instances.Partitions, m.KeyWildcard()) + strings.Join(toks, "."),
	}
}

// startShared ensures the template's partitioned stream, the partition
// consumers and the members bucket, and starts the view and one reader
// per partition.
func (s *streamIntake) startShared(ctx context.Context, t *template) error {
	sh := t.shared
	sh.s = s
	in, cp, m := s.d.cfg.Intake, s.d.cfg.Checkpoint, t.cfg
	name := streamName(s.d.cfg, m)
	ctx, cancel := context.WithTimeout(ctx, setupWait) // replicated assets take a while on a cluster
	defer cancel()
	st, err := s.js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:             name,
		Description:      "lariat: labeled records of template " + m.Name + ", by partition",
		Subjects:         []string{m.Subject},
		SubjectTransform: transform(m),
		Retention:        jetstream.LimitsPolicy,
		Discard:          jetstream.DiscardOld,
		MaxAge:           in.MaxAge.Std(),
		MaxBytes:         in.MaxBytes,
		Storage:          jetstream.FileStorage,
		Replicas:         cp.Replicas,
	})
	if err != nil {
		return fmt.Errorf("stream %s: %w", name, err)
	}
	sh.stream = st
	for _, pt := range t.parts {
		pt.cons, err = st.CreateOrUpdateConsumer(ctx, jetstream.ConsumerConfig{
			Durable:        sh.consumerName(pt.n),
			Description:    fmt.Sprintf("lariat: partition %d of template %s", pt.n, m.Name),
			FilterSubject:  fmt.Sprintf("%d.%s", pt.n, m.Subject),
			DeliverPolicy:  jetstream.DeliverAllPolicy,
			AckPolicy:      jetstream.AckNonePolicy,
			PriorityPolicy: jetstream.PriorityPolicyPinned,
			PriorityGroups: []string{pinGroup},
			PinnedTTL:      sh.ttl,
			Replicas:       cp.Replicas,
		})
		if err != nil {
			return fmt.Errorf("partition %d of stream %s: %w", pt.n, name, err)
		}
	}
	sh.kv, err = s.js.CreateOrUpdateKeyValue(ctx, jetstream.KeyValueConfig{
		Bucket:      in.StreamPrefix + "_" + m.Name + "_members",
		Description: "lariat: the processes running template " + m.Name,
		History:     1,
		TTL:         sh.ttl,
		Replicas:    cp.Replicas,
		Storage:     jetstream.FileStorage,
	})
	if err != nil {
		return fmt.Errorf("members bucket of template %s: %w", m.Name, err)
	}
	sh.refresh(ctx)
	t.log.Info("sharing the template's partitions", "stream", name, "partitions", len(t.parts),
		"member", sh.self, "members", len(sh.view()), "takeover", sh.ttl)
	s.wg.Go(sh.watch)
	for _, pt := range t.parts {
		s.wg.Go(func() { sh.read(pt) })
	}
	return nil
}

// refresh writes this process's member key and reads the live members.
func (sh *share) refresh(ctx context.Context) {
	ctx, cancel := context.WithTimeout(ctx, sh.ttl)
	defer cancel()
	if _, err := sh.kv.Put(ctx, sh.self, []byte(sh.t.d.httpAddr)); err != nil {
		sh.t.log.Warn("member key not written", "err", err)
	}
	kl, err := sh.kv.ListKeys(ctx)
	if err != nil {
		sh.t.log.Warn("members not read", "err", err)
		return
	}
	var ms []string
	for k := range kl.Keys() {
		ms = append(ms, k)
	}
	if !slices.Contains(ms, sh.self) {
		ms = append(ms, sh.self)
	}
	if sh.absent == nil {
		sh.absent = make(map[string]int)
	}
	for _, m := range sh.view() {
		if slices.Contains(ms, m) {
			delete(sh.absent, m)
		} else if sh.absent[m]++; sh.absent[m] < 2 {
			ms = append(ms, m)
		} else {
			delete(sh.absent, m)
		}
	}
	slices.Sort(ms)
	sh.mu.Lock()
	if !slices.Equal(ms, sh.members) {
		sh.t.log.Info("template members changed", "members", ms, "self", sh.self)
		sh.members, sh.changed = ms, time.Now()
	}
	sh.mu.Unlock()
}

// view returns the live members as last read.
func (sh *share) view() []string {
	sh.mu.Lock()
	defer sh.mu.Unlock()
	return sh.members
}

// watch refreshes the member key and the view every wait until the
// intake stops, and measures each rebalance: from a change of the view to
// every partition held here exactly when the view assigns it here.
func (sh *share) watch() {
	tick := time.NewTicker(sh.wait)
	defer tick.Stop()
	for {
		select {
		case <-sh.s.stop:
			ctx, cancel := context.WithTimeout(context.Background(), sh.wait)
			_ = sh.kv.Delete(ctx, sh.self) // the others need not wait for the key to expire
			cancel()
			return
		case <-tick.C:
			sh.refresh(context.Background())
			sh.settle()
		}
	}
}

// settle observes the rebalance time once every partition is where the
// current view puts it (one assigned here and quiet, with nothing to
// apply, counts as held: it is taken at its next record).
func (sh *share) settle() {
	sh.mu.Lock()
	changed := sh.changed
	sh.mu.Unlock()
	if changed.IsZero() {
		return
	}
	for _, pt := range sh.t.parts {
		if held := pt.held.Load(); sh.wants(pt.n) && !held && !pt.quiet.Load() || !sh.wants(pt.n) && held {
			return
		}
	}
	d := time.Since(changed)
	sh.t.d.tm.Rebalance.WithLabelValues(sh.t.name).Observe(d.Seconds())
	sh.t.log.Info("partitions balanced", "held", sh.t.heldParts(), "after", d.Round(time.Millisecond))
	sh.mu.Lock()
	if sh.changed.Equal(changed) {
		sh.changed = time.Time{}
	}
	sh.mu.Unlock()
}

// wants reports whether the view assigns partition n to this process.
func (sh *share) wants(n int) bool {
	sh.mu.Lock()
	defer sh.mu.Unlock()
	if sh.assign == nil || !slices.Equal(sh.assignFor, sh.members) {
		sh.assign, sh.assignFor = assign(sh.members, len(sh.t.parts)), sh.members
	}
	return sh.assign[n] == sh.self
}

// assign spreads partitions 0..parts-1 over the members: rendezvous
// (highest random weight) hashing, so that a member joining or leaving
// moves few partitions besides its own (Thaler & Ravishankar 1998, "Using
// name-based mappings to increase hit rates", IEEE/ACM Trans. Netw.
// 6(1)), with each member's load bounded by ceil(parts/members), since a
// few partitions over a few members are far from even by hashing alone
// (the bound of "consistent hashing with bounded loads", Mirrokni, Thorup
// & Zadimoghaddam 2018, SODA). Every process with the same view computes
// the same assignment.
func assign(members []string, parts int) []string {
	out := make([]string, parts)
	if len(members) == 0 {
		return out
	}
	limit := (parts + len(members) - 1) / len(members)
	load := make(map[string]int, len(members))
	for n := range parts {
		var best string
		var top uint64
		for _, m := range members {
			if load[m] >= limit {
				continue
			}
			if w := weight(m, n); best == "" || w > top || w == top && m > best {
				best, top = m, w
			}
		}
		out[n] = best
		load[best]++
	}
	return out
}

// weight is member m's rendezvous weight for partition n: FNV-1a of both,
// finished by the splitmix64 mixer so that near names spread (Steele, Lea
// & Flood 2014, "Fast splittable pseudorandom number generators", OOPSLA).
func weight(m string, n int) uint64 {
	h := fnv.New64a()
	h.Write([]byte(m))
	h.Write(binary.AppendUvarint(nil, uint64(n)))
	z := h.Sum64() + 0x9e3779b97f4a7c15
	z = (z ^ z>>30) * 0xbf58476d1ce4e5b9
	z = (z ^ z>>27) * 0x94d049bb133111eb
	return z ^ z>>31
}

// read is partition pt's reader: it pulls while the view assigns the
// partition here or this process holds it, and hands it over when it
// holds it and the view no longer does.
func (sh *share) read(pt *part) {
	for {
		select {
		case <-sh.s.stop:
			return
		default:
		}
		want, held := sh.wants(pt.n), pt.held.Load()
		switch {
		case held && !want:
			sh.release(pt)
			continue
		case !held && !want:
			select {
			case <-sh.s.stop:
				return
			case <-time.After(sh.wait):
			}
			continue
		}
		b, err := pt.cons.Fetch(256, jetstream.FetchMaxWait(sh.wait), jetstream.FetchPriorityGroup(pinGroup))
		if err != nil {
			sh.t.log.Warn("partition pull failed", "partition", pt.n, "err", err)
			select {
			case <-sh.s.stop:
				return
			case <-time.After(sh.wait):
			}
			continue
		}
		got, ok := sh.deliver(pt, b)
		if !ok {
			return
		}
		if got == 0 && !pt.held.Load() {
			sh.nudge(pt)
		}
		if err := b.Error(); errors.Is(err, jetstream.ErrPinIDMismatch) && pt.held.Load() {
			sh.lose(pt, "the server refused the pin: "+err.Error())
		}
	}
}

// deliver dispatches one pulled batch of partition pt. The first record
// under a new pin id takes the partition: the rest of the batch is
// dropped, and the consumer reset only once the pull has ended (a pull
// still open would receive, and lose, the first records after the reset).
// It returns false once the intake stops.
func (sh *share) deliver(pt *part, b jetstream.MessageBatch) (got int, ok bool) {
	defer func() {
		for range b.Messages() { // what is left (a stop, a new pin)
		}
	}()
	for m := range b.Messages() {
		got++
		pin := m.Headers().Get("Nats-Pin-Id")
		if cur := pt.pin.Load(); !pt.held.Load() || cur == nil || *cur != pin {
			if pt.held.Load() {
				sh.lose(pt, "the server pinned it again")
			}
			for range b.Messages() { // the pull ends before the reset
			}
			if !errors.Is(b.Error(), jetstream.ErrPinIDMismatch) { // else the pin is gone already
				sh.take(pt, pin)
			}
			return got, true
		}
		meta, err := m.Metadata()
		if err != nil {
			sh.t.log.Error("stream message without metadata; skipped", "err", err)
			continue
		}
		seq := meta.Sequence.Stream
		if seq <= pt.last {
			continue // delivered again after a reset
		}
		pt.last = seq
		subject := m.Subject()
		if i := strings.IndexByte(subject, '.'); i >= 0 {
			subject = subject[i+1:]
		}
		if !sh.t.dispatch(pt, subject, m.Data(), seq, sh.s.stop, nil) {
			return got, false
		}
	}
	return got, true
}

// nudge makes a partition that nobody holds deliver again what a process
// that died had pulled past the partition's index floor: with no pin and
// nothing pending, but records delivered beyond the floor, the consumer
// is reset to the floor + 1, so that the next pull is pinned and takes
// the partition. (A reset while another process holds the partition only
// redelivers records its reader passes over.) At most once every two
// pulls per partition.
func (sh *share) nudge(pt *part) {
	if time.Since(pt.nudged) < 2*sh.wait {
		return
	}
	pt.nudged = time.Now()
	ctx, cancel := context.WithTimeout(context.Background(), sh.ttl)
	defer cancel()
	pt.quiet.Store(false)
	info, err := pt.cons.Info(ctx)
	if err != nil || info.NumPending > 0 || pinnedID(info) != "" {
		return
	}
	floor, err := sh.t.indexFloor(pt)
	if err != nil {
		return
	}
	if info.Delivered.Stream <= floor {
		pt.quiet.Store(true)
		return
	}
	if _, err := sh.stream.ResetConsumerToSequence(ctx, sh.consumerName(pt.n), floor+1); err != nil {
		sh.t.log.Warn("partition consumer not reset to its floor", "partition", pt.n, "err", err)
		return
	}
	sh.t.log.Info("partition unheld with records past its floor: delivered again from the floor",
		"partition", pt.n, "from", floor+1, "delivered", info.Delivered.Stream)
}

// pinnedID returns the pin id of the consumer's priority group ("" when
// no client is pinned).
func pinnedID(info *jetstream.ConsumerInfo) string {
	for _, g := range info.PriorityGroups {
		if g.Group == pinGroup {
			return g.PinnedClientID
		}
	}
	return ""
}

// take makes partition pt held under pin: its index is read from the
// shared store and the consumer reset to the floor + 1.
func (sh *share) take(pt *part, pin string) {
	t := sh.t
	t.mu.Lock()
	t.loadIndex(pt)
	t.mu.Unlock()
	ctx, cancel := context.WithTimeout(context.Background(), sh.ttl)
	defer cancel()
	if _, err := sh.stream.ResetConsumerToSequence(ctx, sh.consumerName(pt.n), pt.floor+1); err != nil {
		t.log.Error("partition not taken: its consumer could not be reset to the index floor", "partition", pt.n, "err", err)
		t.mu.Lock()
		t.forget(pt)
		t.mu.Unlock()
		return
	}
	pt.last = pt.floor
	pt.quiet.Store(false)
	pt.stopping.Store(false)
	pt.pin.Store(&pin)
	pt.held.Store(true)
	t.d.tm.Takeovers.WithLabelValues(t.name).Inc()
	sh.gaugeHeld()
	t.log.Info("partition taken", "partition", pt.n, "from", pt.floor+1, "held", t.heldParts())
}

// mayWrite reports whether this process may write partition pt's
// checkpoints: it holds it, and the server's pin of the partition's
// consumer is still its own.
func (sh *share) mayWrite(pt *part) bool {
	pin := pt.pin.Load()
	if !pt.held.Load() || pin == nil {
		return false
	}
	if f := pt.checkFailed.Load(); f != 0 && time.Since(time.Unix(0, f)) < pinCheckWait {
		return false // the server did not answer just now: no need to wait again
	}
	ctx, cancel := context.WithTimeout(context.Background(), min(sh.ttl, pinCheckWait))
	defer cancel()
	info, err := pt.cons.Info(ctx)
	if err != nil {
		pt.checkFailed.Store(time.Now().UnixNano())
		return false
	}
	pt.checkFailed.Store(0)
	return pinnedID(info) == *pin
}

// pinCheckWait bounds a pin check; a check that failed makes the
// partition's saves fail at once for as long (a shutdown cut off from NATS
// does not wait once per instance).
const pinCheckWait = time.Second

// lose drops partition pt at once: another process may hold it. Its
// instances drop their queued records and stop without a checkpoint
// (mayWrite is false from now on), and are forgotten.
func (sh *share) lose(pt *part, why string) {
	pt.held.Store(false)
	sh.t.stopPart(pt, true)
	sh.t.mu.Lock()
	sh.t.forget(pt)
	sh.t.mu.Unlock()
	sh.gaugeHeld()
	sh.t.log.Warn("partition lost; its instances stopped without a checkpoint", "partition", pt.n, "why", why, "held", sh.t.heldParts())
}

// release hands partition pt over on purpose: its instances apply what
// they hold and save, its index is saved, then the pin is given up.
func (sh *share) release(pt *part) {
	t := sh.t
	t.stopPart(pt, false)
	t.mu.Lock()
	err := t.saveIndex(pt, time.Now())
	t.forget(pt)
	t.mu.Unlock()
	if err != nil {
		t.log.Error("partition index not saved before the handover", "partition", pt.n, "err", err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), sh.ttl)
	defer cancel()
	sh.unpin(ctx, pt)
	sh.gaugeHeld()
	t.log.Info("partition handed over", "partition", pt.n, "held", t.heldParts())
}

// gaugeHeld sets lariat_template_partitions_held to the partitions held.
func (sh *share) gaugeHeld() {
	sh.t.d.tm.Partitions.WithLabelValues(sh.t.name).Set(float64(len(sh.t.heldParts())))
}

// unpin gives up the server's pin of partition pt, so that another
// process pulling it is pinned at once.
func (sh *share) unpin(ctx context.Context, pt *part) {
	pt.held.Store(false)
	if err := sh.stream.UnpinConsumer(ctx, sh.consumerName(pt.n), pinGroup); err != nil {
		sh.t.log.Warn("partition not unpinned; another process takes it after instances.takeover", "partition", pt.n, "err", err)
	}
}

// partitions returns the partitions of each shared template this process
// holds (for /readyz).
func (d *Daemon) partitions() map[string][]int {
	var out map[string][]int
	for _, t := range d.templates {
		if t.shared == nil {
			continue
		}
		if out == nil {
			out = make(map[string][]int)
		}
		out[t.name] = t.heldParts()
		if out[t.name] == nil {
			out[t.name] = []int{}
		}
	}
	return out
}
