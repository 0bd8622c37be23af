package daemon

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/sink"
	"lariat/sink/checkpoint"
)

// Reject reasons of a template's records.
const (
	// reasonKey: the subject's key token is not a valid instance key.
	reasonKey = "key"
	// reasonInstances: a new key past instances.max.
	reasonInstances = "instances"
)

// template is a model entry with instances.key_token: one model (a worker
// named <template>.<key>) per distinct key in the subject's key token,
// created on the key's first record, unloaded after instances.idle without
// a record (checkpointed first) and loaded back from its checkpoint on its
// next record.
//
// With the durable intake one stream captures the template's subject and
// one ordered consumer reads every key in stream order (dispatch). Each
// instance's checkpoint holds the last stream sequence it applied, so a
// record already applied is skipped per instance. The template's index (a
// checkpoint named <template>._index) keeps every known key with the
// position of its newest saved checkpoint and the floor: a sequence at or
// below which every record is in some saved checkpoint. A restart reads
// the stream from floor+1 and skips, per instance, what its checkpoint
// already holds: nothing is lost and nothing applied twice.
type template struct {
	d    *Daemon
	cfg  *config.Model
	name string
	log  *slog.Logger
	mm   *sink.ModelMetrics // the template's own rejects (key, instances)

	mu     sync.Mutex
	inst   map[string]*instance // every known key (of the partitions held), loaded or not
	loaded int                  // instances with a running worker

	// parts are the template's partitions (instances.partitions; one
	// for an unshared template), each with its reader, floor and index.
	parts []*part
	// shared runs the partitions shared with other processes (nil with
	// one partition; share.go).
	shared *share
	// started is set before run's goroutine starts (stopAll waits for it
	// only then).
	started bool
	quit    chan struct{}
	done    chan struct{}
}

// part is one partition of a template's keys. An unshared template has
// one, over every key, read by this process alone; a shared template's
// partitions are held by one process each at a time (share.go).
type part struct {
	n     int           // the partition's number, 0..partitions-1
	index string        // the checkpoint name of its index
	read  atomic.Uint64 // last stream sequence dispatched (or rejected here)
	floor uint64        // the index's floor when it was loaded
	// held is set while this process owns a shared partition (always
	// for an unshared template); pin is the server's pin id of the
	// ownership, and cons the partition's consumer (share.go).
	held atomic.Bool
	pin  atomic.Pointer[string]
	cons jetstream.Consumer
	last uint64 // the last sequence the reader passed on (reader goroutine)
	// nudged is when the reader last checked an unheld partition for
	// records a dead process left unread (reader goroutine).
	nudged time.Time
	// checkFailed is when a pin check last went unanswered (Unix ns; 0:
	// the last one was answered).
	checkFailed atomic.Int64
	// quiet is set when the reader found the unheld partition with
	// nothing to apply: no pin, nothing pending, nothing delivered past
	// its floor.
	quiet atomic.Bool
	// stopping is set from the moment a shared partition's instances are
	// stopped (handed over or lost) until it is taken again.
	stopping atomic.Bool
}

// instance is one key of a template. w is nil while it is unloaded.
type instance struct {
	key string
	p   *part // the partition of its records
	w   *worker
	// leaving is the worker being unloaded (applying what it holds and
	// saving its checkpoint), until it has; a load waits for it first.
	leaving *worker
	last    atomic.Int64 // Unix ns of the last record dispatched
	// lastSeq is the last stream sequence dispatched to it; saved is the
	// position of its newest saved checkpoint (before its first
	// checkpoint: its first sequence − 1). lastSeq > saved means records
	// not yet in a saved checkpoint.
	lastSeq, saved atomic.Uint64
}

// instanceQueue bounds an instance's queue (the stream is the buffer; a
// template may have thousands of instances).
const instanceQueue = 64

// instanceSlowdown is how much less often an instance than a plain model
// idles, checks its publication and may publish a changed model (a
// template may have thousands of instances, and each publication solves
// the window exactly).
const instanceSlowdown = 10

// instanceName returns the model name of key in template t.
func instanceName(t, key string) string { return t + "." + key }

// indexName is the checkpoint name of a template's index; "_" cannot start
// a key, so it never names an instance.
func indexName(t string) string { return t + "._index" }

// partIndexName is the checkpoint name of partition n's index in a
// template of more than one partition.
func partIndexName(t string, n int) string { return fmt.Sprintf("%s._index.%d", t, n) }

func newTemplate(d *Daemon, m *config.Model) *template {
	t := &template{
		d: d, cfg: m, name: m.Name,
		log:  d.log.With("template", m.Name),
		mm:   d.metrics.Model(m.Name),
		inst: make(map[string]*instance),
		quit: make(chan struct{}),
		done: make(chan struct{}),
	}
	n := max(m.Instances.Partitions, 1)
	for i := range n {
		pt := &part{n: i, index: indexName(m.Name)}
		if n > 1 {
			pt.index = partIndexName(m.Name, i)
		}
		t.parts = append(t.parts, pt)
	}
	if n == 1 {
		t.parts[0].held.Store(true)
	} else {
		t.shared = newShare(t)
	}
	return t
}

// heldParts returns the numbers of the partitions this process holds.
func (t *template) heldParts() []int {
	var ns []int
	for _, pt := range t.parts {
		if pt.held.Load() {
			ns = append(ns, pt.n)
		}
	}
	return ns
}

// stopPart stops every loaded instance of partition pt as an idle one is
// unloaded (it applies what it holds and saves, if it still may; with
// abandon, it drops what it holds) and waits for them; the caller forgets
// the partition's keys.
func (t *template) stopPart(pt *part, abandon bool) {
	t.mu.Lock()
	pt.stopping.Store(true) // no instance of it is loaded again (lookup)
	var ins []*instance
	var ws []*worker
	for _, in := range t.inst {
		if in.p != pt {
			continue
		}
		if w := in.w; w != nil {
			w.unloading, w.abandon = true, abandon
			w.stop()
			in.w, in.leaving = nil, w
		}
		if in.leaving != nil {
			ins = append(ins, in)
			ws = append(ws, in.leaving)
		}
	}
	t.mu.Unlock()
	for _, w := range ws {
		<-w.done
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	for i, in := range ins {
		if in.leaving == ws[i] {
			t.unloaded(in)
		}
	}
}

// key returns the instance key of subject, or a reject reason and detail.
func (t *template) key(subject string) (key, reason, detail string) {
	key = config.InstanceKey(subject, t.cfg.Instances.KeyToken)
	if !config.ValidKey(key) {
		return "", reasonKey, fmt.Sprintf("subject %q: token %d (%q) is not an instance key (allowed: [A-Za-z0-9][A-Za-z0-9_-]*, at most 64 bytes)",
			subject, t.cfg.Instances.KeyToken, key)
	}
	return key, "", ""
}

// reject counts a record the template refused before any instance saw it.
func (t *template) reject(subject, reason, detail string, data []byte) {
	t.mm.Rejected(reason)
	if p := t.d.pub.Load(); p != nil {
		_ = p.PublishReject(&sink.Reject{Model: t.name, Subject: subject, Reason: reason, Detail: detail, Data: data})
	}
}

// instanceFor returns key's loaded worker, creating or loading it; t.mu is
// held. It returns a reject reason when the key is new and the template is
// full, or the instance cannot be built.
func (t *template) instanceFor(pt *part, key string, seq uint64) (*instance, string, string) {
	in := t.inst[key]
	if in == nil {
		if len(t.inst) >= t.cfg.Instances.Max {
			return nil, reasonInstances, fmt.Sprintf("template %s has %d instances (instances.max)", t.name, len(t.inst))
		}
		in = &instance{key: key, p: pt}
		if seq > 0 {
			in.saved.Store(seq - 1)
			in.lastSeq.Store(seq - 1)
		}
		t.inst[key] = in
	}
	if in.w == nil {
		if err := t.load(in); err != nil {
			t.log.Error("instance not loaded", "key", key, "err", err)
			return nil, reasonInstances, fmt.Sprintf("instance %s could not be loaded: %v", instanceName(t.name, key), err)
		}
	}
	return in, "", ""
}

// load builds key's worker, restores it from its checkpoint if it has one,
// and starts its goroutine; t.mu is held.
func (t *template) load(in *instance) error {
	if in.leaving != nil {
		<-in.leaving.done // its checkpoint is saved: load from it
		t.unloaded(in)
	}
	m := *t.cfg
	m.Name = instanceName(t.name, in.key)
	m.Queue = min(m.Queue, instanceQueue)
	w, err := newWorker(t.d, &m)
	if err != nil {
		return err
	}
	if t.d.ckpt != nil {
		w.restored = w.restore()
		if w.startPos > in.saved.Load() {
			in.saved.Store(w.startPos)
		}
		if w.startPos > in.lastSeq.Load() {
			in.lastSeq.Store(w.startPos)
		}
	}
	if p := t.d.pub.Load(); p != nil && p.KV() != nil {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		if e, err := p.KV().Get(ctx, m.Name); err == nil {
			var v struct {
				Version uint64 `json:"version"`
			}
			if json.Unmarshal(e.Value(), &v) == nil {
				w.versionFloor.Store(v.Version)
			}
		}
		cancel()
	}
	if t.shared != nil {
		pt := in.p
		w.mayWrite = func() bool { return t.shared.mayWrite(pt) }
	}
	w.onSaved = func(pos uint64, size int) {
		if pos > in.saved.Load() {
			in.saved.Store(pos)
		}
		t.d.tm.StateBytes.WithLabelValues(w.name).Set(float64(size))
	}
	t.d.store.Register(w.name)
	in.w = w
	in.last.Store(time.Now().UnixNano())
	t.loaded++
	t.d.tm.Loaded.WithLabelValues(t.name).Set(float64(t.loaded))
	t.d.tm.Known.WithLabelValues(t.name).Set(float64(len(t.inst)))
	w.running.Store(true)
	t.d.wg.Go(w.run)
	return nil
}

// dispatch hands one record of partition pt's stream (sequence seq, 0
// from core NATS) to its instance. A record at or below the instance's
// checkpoint position was applied before and is skipped. It returns false
// once stop is closed (nothing queued).
func (t *template) dispatch(pt *part, subject string, data []byte, seq uint64, stop <-chan struct{}, m *nats.Msg) bool {
	key, reason, detail := t.key(subject)
	if reason != "" {
		t.reject(subject, reason, detail, data)
		pt.read.Store(seq)
		return true
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	if in := t.inst[key]; seq > 0 && in != nil && in.w == nil && seq <= in.saved.Load() {
		pt.read.Store(seq) // in the unloaded instance's checkpoint already
		return true
	}
	in, reason, detail := t.instanceFor(pt, key, seq)
	if reason != "" {
		t.reject(subject, reason, detail, data)
		pt.read.Store(seq)
		return true
	}
	if seq > 0 && seq <= in.w.startPos {
		pt.read.Store(seq) // applied before the checkpoint it was restored from
		return true
	}
	in.last.Store(time.Now().UnixNano())
	if m != nil {
		in.w.intake(m)
		return true
	}
	in.lastSeq.Store(seq) // before read: see floorNow
	if !in.w.intakeSeq(subject, data, seq, stop) {
		return false
	}
	pt.read.Store(seq)
	return true
}

// handleCore is the core NATS subscription callback of the template.
func (t *template) handleCore(m *nats.Msg) { t.dispatch(t.parts[0], m.Subject, m.Data, 0, nil, m) }

// floorNow returns a stream sequence at or below which every record of
// partition pt the template dispatched is in a saved checkpoint of its
// instance: the last sequence dispatched, lowered to the checkpoint
// position of every instance holding records not yet saved. read is
// loaded before each instance's lastSeq, and lastSeq is stored before
// read, so an instance that received a record at or below read is seen
// with it; t.mu is held.
func (t *template) floorNow(pt *part) uint64 {
	f := pt.read.Load()
	for _, in := range t.inst {
		if in.p != pt {
			continue
		}
		if last, saved := in.lastSeq.Load(), in.saved.Load(); last > saved && saved < f {
			f = saved
		}
	}
	return f
}

// indexFormat is the version of the index payload.
const indexFormat = 1

// saveIndex writes partition pt's index (the template's, unshared); t.mu
// is held. A shared partition's index is written only while it is held.
func (t *template) saveIndex(pt *part, now time.Time) error {
	if t.d.ckpt == nil {
		return nil
	}
	if t.shared != nil && !t.shared.mayWrite(pt) {
		return fmt.Errorf("partition %d is no longer held here", pt.n)
	}
	keys := make([]string, 0, len(t.inst))
	for k, in := range t.inst {
		if in.p == pt {
			keys = append(keys, k)
		}
	}
	slices.Sort(keys)
	b := binary.AppendUvarint(nil, indexFormat)
	b = binary.AppendUvarint(b, t.floorNow(pt))
	b = binary.AppendUvarint(b, uint64(len(keys)))
	for _, k := range keys {
		b = binary.AppendUvarint(b, uint64(len(k)))
		b = append(b, k...)
		b = binary.AppendUvarint(b, t.inst[k].saved.Load())
	}
	return t.d.ckpt.Save(pt.index, checkpoint.Encode(b, checkpoint.Meta{Arithmetic: arithmetic(), Written: now}))
}

// loadIndex reads partition pt's index (at start; a shared partition's
// when this process takes it): the known keys with their checkpoint
// positions, and the floor its stream is read from; t.mu is held or no
// other goroutine runs.
func (t *template) loadIndex(pt *part) {
	pt.floor = 0
	pt.read.Store(0)
	payload, _, skipped, err := t.d.ckpt.Load(pt.index)
	for _, s := range skipped {
		t.log.Error("template index refused; using the one before it", "partition", pt.n, "reason", s)
	}
	if errors.Is(err, checkpoint.ErrNotFound) {
		return
	}
	if err == nil {
		err = t.decodeIndex(pt, payload)
	}
	if err != nil {
		// Without an index the stream is read from its start; each
		// instance still skips what its checkpoint holds.
		t.log.Error("template index unusable; reading the stream from its first record", "partition", pt.n, "err", err)
		t.forget(pt)
		pt.floor = 0
		pt.read.Store(0)
		return
	}
	t.d.tm.Known.WithLabelValues(t.name).Set(float64(len(t.inst)))
	t.log.Info("template index restored", "partition", pt.n, "instances", len(t.inst), "floor", pt.floor)
}

// forget drops partition pt's keys that have no worker (an index that
// could not be read whole, or a partition handed over); t.mu is held.
func (t *template) forget(pt *part) {
	for k, in := range t.inst {
		if in.p == pt && in.w == nil && in.leaving == nil {
			delete(t.inst, k)
		}
	}
	t.d.tm.Known.WithLabelValues(t.name).Set(float64(len(t.inst)))
}

// indexFloor reads partition pt's saved index floor (0 without an index).
func (t *template) indexFloor(pt *part) (uint64, error) {
	payload, _, _, err := t.d.ckpt.Load(pt.index)
	if errors.Is(err, checkpoint.ErrNotFound) {
		return 0, nil
	}
	if err != nil {
		return 0, err
	}
	v, n := binary.Uvarint(payload)
	if n <= 0 || v != indexFormat {
		return 0, fmt.Errorf("template index format %d (this build reads %d)", v, indexFormat)
	}
	f, m := binary.Uvarint(payload[n:])
	if m <= 0 {
		return 0, errors.New("template index truncated")
	}
	return f, nil
}

func (t *template) decodeIndex(pt *part, b []byte) error {
	next := func() (uint64, error) {
		v, n := binary.Uvarint(b)
		if n <= 0 {
			return 0, errors.New("template index truncated")
		}
		b = b[n:]
		return v, nil
	}
	v, err := next()
	if err != nil {
		return err
	}
	if v != indexFormat {
		return fmt.Errorf("template index format %d (this build reads %d)", v, indexFormat)
	}
	if pt.floor, err = next(); err != nil {
		return err
	}
	n, err := next()
	if err != nil {
		return err
	}
	if n > uint64(len(b)) {
		return fmt.Errorf("template index of %d keys in %d bytes", n, len(b))
	}
	for range n {
		l, err := next()
		if err != nil {
			return err
		}
		if l > uint64(len(b)) {
			return errors.New("template index truncated")
		}
		key := string(b[:l])
		b = b[l:]
		pos, err := next()
		if err != nil {
			return err
		}
		if !config.ValidKey(key) {
			return fmt.Errorf("template index holds key %q", key)
		}
		in := &instance{key: key, p: pt}
		in.saved.Store(pos)
		in.lastSeq.Store(pos)
		t.inst[key] = in
	}
	pt.read.Store(pt.floor)
	return nil
}

// run unloads idle instances and saves the index every checkpoint
// interval, until stop.
func (t *template) run() {
	defer close(t.done)
	every := t.d.cfg.Checkpoint.Interval.Std()
	if idle := t.cfg.Instances.Idle.Std(); idle > 0 {
		every = min(every, max(idle/4, 10*time.Millisecond))
	}
	tick := time.NewTicker(every)
	defer tick.Stop()
	lastIndex := time.Now()
	for {
		select {
		case <-t.quit:
			return
		case now := <-tick.C:
			n := t.evictIdle(now)
			if n > 0 || now.Sub(lastIndex) >= t.d.cfg.Checkpoint.Interval.Std() {
				lastIndex = now
				t.saveIndexes(now)
			}
		}
	}
}

// saveIndexes writes the index of every partition held.
func (t *template) saveIndexes(now time.Time) {
	t.mu.Lock()
	defer t.mu.Unlock()
	for _, pt := range t.parts {
		if !pt.held.Load() {
			continue
		}
		if err := t.saveIndex(pt, now); err != nil {
			t.log.Error("template index not saved", "partition", pt.n, "err", err)
		}
	}
}

// evictIdle unloads every instance silent for instances.idle: its worker
// applies what it holds, saves its checkpoint and returns (waited for
// without holding t.mu, so the other instances go on). It returns how many
// were unloaded.
func (t *template) evictIdle(now time.Time) int {
	idle := t.cfg.Instances.Idle.Std()
	if idle <= 0 {
		return 0
	}
	t.mu.Lock()
	var gone []*instance
	var ws []*worker
	for _, in := range t.inst {
		if w := in.w; w != nil && now.UnixNano()-in.last.Load() >= int64(idle) && len(w.queue) == 0 {
			w.unloading = true
			w.stop()
			in.w, in.leaving = nil, w
			gone = append(gone, in)
			ws = append(ws, w)
		}
	}
	t.mu.Unlock()
	for _, w := range ws {
		<-w.done
	}
	t.mu.Lock()
	for i, in := range gone {
		if in.leaving == ws[i] { // not loaded again meanwhile
			t.unloaded(in)
		}
	}
	t.mu.Unlock()
	return len(gone)
}

// unloaded finishes the unloading of in, whose worker has returned; t.mu
// is held. A worker whose last checkpoint failed leaves its records since
// the one before unsaved (the floor stays below them, so a restart
// applies them again).
func (t *template) unloaded(in *instance) {
	w := in.leaving
	in.leaving = nil
	w.mm.QueueDepthFunc(nil)
	if w.saveFailed {
		t.log.Error("instance unloaded without its last checkpoint: its records since the one before are applied again after a restart", "model", w.name)
	}
	t.loaded--
	t.d.tm.Loaded.WithLabelValues(t.name).Set(float64(t.loaded))
	t.d.tm.Unloads.WithLabelValues(t.name).Inc()
}

// stopAll stops the template's goroutine and every loaded instance (each
// applies what it holds, publishes and saves its checkpoint), then saves
// the index. The intake must have stopped.
func (t *template) stopAll(ctx context.Context) error {
	close(t.quit)
	if t.started {
		<-t.done
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	var ws []*worker
	for _, in := range t.inst {
		if in.w != nil {
			in.w.stop()
			ws = append(ws, in.w)
		}
		if in.leaving != nil {
			ws = append(ws, in.leaving)
		}
	}
	var errs []error
	for _, w := range ws {
		if err := w.wait(ctx); err != nil {
			errs = append(errs, err)
		}
	}
	for _, pt := range t.parts {
		if !pt.held.Load() {
			continue
		}
		if err := t.saveIndex(pt, time.Now()); err != nil {
			errs = append(errs, fmt.Errorf("daemon: template %s index: %w", t.name, err))
		} else if t.shared != nil {
			t.shared.unpin(ctx, pt)
		}
	}
	return errors.Join(errs...)
}

// lookup returns the worker of instance name (<template>.<key>) if the key
// is known, loading it if it was unloaded (not while its partition is
// being handed over or lost).
func (t *template) lookup(key string) (*worker, bool) {
	t.mu.Lock()
	defer t.mu.Unlock()
	in := t.inst[key]
	if in == nil {
		return nil, false
	}
	if in.w == nil {
		if in.p.stopping.Load() {
			return nil, false // its partition is being handed over or lost
		}
		if err := t.load(in); err != nil {
			return nil, false
		}
		in.last.Store(time.Now().UnixNano())
	}
	return in.w, true
}

// workers returns the loaded instances' workers.
func (t *template) workers() []*worker {
	t.mu.Lock()
	defer t.mu.Unlock()
	var ws []*worker
	for _, in := range t.inst {
		if in.w != nil {
			ws = append(ws, in.w)
		}
	}
	return ws
}
