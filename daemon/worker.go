package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"golang.org/x/time/rate"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/sink"
)

// reasonQueueFull is the reject reason of a record that found its model's
// queue full.
const reasonQueueFull = "queue_full"

// reasonNotReady is the reject reason of a record to score that arrived
// before the model published its first version.
const reasonNotReady = "not_ready"

// item is one decoded record on its way from the subscription goroutine to
// the model goroutine. Items cycle between worker.free and worker.queue, so
// the steady state allocates nothing of ours.
type item struct {
	rec     record.Record
	names   []string // the decoder's feature order when rec was decoded (shared, read-only)
	subject string   // the message's subject
	data    []byte   // the message's bytes (republished with a reject)
	seq     uint64   // stream sequence of a durable intake; 0 from core NATS
	// reason and detail are set for a durable record that could not be
	// decoded: it goes through the queue so that the model's stream
	// position moves past it in order.
	reason, detail string
}

// worker runs one model. Its intake half (intake) runs on the goroutine of
// the subscription that feeds it and owns the decoder; its model half (run)
// is the only goroutine that touches the model's pipeline. They meet only
// through the bounded queue. The worker is the thin loop queue → pipeline →
// outbox: everything the model knows is in its pipeline.Pipeline.
type worker struct {
	d    *Daemon
	cfg  *config.Model
	name string
	log  *slog.Logger
	mm   *sink.ModelMetrics
	dim  int // the most columns a record can have: pipeline.Width (the cap)

	// intake side
	dec   *record.Decoder
	slots slotWatch  // the decoder's dropped names and freed slots (width.go)
	free  chan *item // empty items; empty channel = queue full
	queue chan *item // decoded records in arrival order

	// control
	ctl      chan func() // run a function on the model goroutine (tests, threshold changes)
	quit     chan struct{}
	done     chan struct{}
	running  atomic.Bool
	stopOnce sync.Once

	// model goroutine state
	pipe      *pipeline.Pipeline
	idleSteps int
	popts     pipeline.Options // how the pipeline is built (fresh or restored)
	// startPos is the stream position the model starts from (its
	// restored checkpoint's; 0 without one). The durable intake reads it
	// once, before the model goroutine has applied anything of the stream.
	startPos uint64
	restored bool // the pipeline came from a checkpoint: publish at once
	// checkpoints (checkpoint.go)
	sinceSave             int // records consumed since the last checkpoint
	lastSave, lastSaveLog time.Time
	saveFailed            bool // the last checkpoint could not be saved
	// onSaved, if set, is called on the model goroutine after each saved
	// checkpoint with its stream position and state size (templates).
	onSaved func(pos uint64, size int)
	// mayWrite, if set, is asked before each checkpoint (on the model
	// goroutine): false means the instance's partition is no longer held
	// by this process, and nothing is saved.
	mayWrite func() bool
	// tick is how often the model goroutine idles and checks publication.
	tick time.Duration
	// unloading is set before stop by a template unloading an idle
	// instance: the final document is not published again (nothing
	// changed since the last one), the checkpoint is still saved.
	unloading bool
	// abandon is set before stop by a template that lost the instance's
	// partition to another process: the queued records are dropped, and
	// nothing is published or saved.
	abandon bool

	// scoring of the score_subject (nil without one; scoring.go)
	scoring *scoring

	// publication failures (publishFailed): the reason, for Ready; the
	// last log line's time (model goroutine only)
	problem    atomic.Pointer[string]
	lastPubLog time.Time

	// shared
	rejected     atomic.Uint64
	rejects      *rate.Limiter                     // republication of rejected records
	versionFloor atomic.Uint64                     // last version found in the KV bucket at start
	snap         atomic.Pointer[pipeline.Snapshot] // latest published model, for predictions
}

func newWorker(d *Daemon, m *config.Model) (*worker, error) {
	log := d.log.With("model", m.Name)
	popts := pipeline.Options{
		Model:      m,
		MinPublish: d.minPublish,
		Threshold:  thresholdOverrideFor(d.cfg.DataDir, m, log),
	}
	if m.Template() {
		// Thousands of instances: each publishes a changed model (an
		// exact solve on its window) and idles ten times less often.
		popts.MinPublish = instanceSlowdown * d.minPublish
	}
	pipe, err := pipeline.New(popts)
	if err != nil {
		return nil, fmt.Errorf("daemon: %w", err)
	}
	dim := pipe.Width()
	w := &worker{
		d: d, cfg: m, name: m.Name, dim: dim,
		log:       log,
		mm:        d.metrics.Model(m.Name),
		ctl:       make(chan func()),
		quit:      make(chan struct{}),
		done:      make(chan struct{}),
		free:      make(chan *item, m.Queue),
		queue:     make(chan *item, m.Queue),
		pipe:      pipe,
		popts:     popts,
		idleSteps: m.Learner.IdleSteps,
		rejects:   newRejectLimiter(d.rejectRate, d.rejectBurst),
		tick:      d.tick,
	}
	if m.Template() {
		w.tick = instanceSlowdown * d.tick
	}
	w.dec = w.newDecoder(nil)
	// Each item's record starts with room for the listed features (at least
	// 32 columns), not for the cap: a queue of 4096 items at the default cap
	// of 256 would hold 8 MB. An item grows once when it first carries a
	// wider record (the decoder reallocates X), so the steady state still
	// allocates nothing.
	xcap := min(dim, max(32, len(m.Features)))
	if m.Template() {
		xcap = 0 // thousands of instances: rows grow to the width in use, once per item
	}
	for range m.Queue {
		w.free <- &item{rec: record.Record{X: make([]float64, 0, xcap)}}
	}
	w.mm.QueueDepthFunc(func() int { return len(w.queue) })
	w.scoring = newScoring(w)
	return w, nil
}

// intake decodes one core NATS message and queues it for the model
// goroutine, or rejects it. It runs on the subscription's goroutine and
// never blocks: a full queue rejects the record (queue_full).
func (w *worker) intake(m *nats.Msg) {
	var it *item
	select {
	case it = <-w.free:
	default:
		w.mm.QueueDropped.Inc()
		w.d.reject(w, m.Subject, reasonQueueFull, fmt.Sprintf("queue of %d records is full", cap(w.queue)), m.Data)
		return
	}
	if err := w.decode(m.Data, &it.rec); err != nil {
		w.free <- it
		reason, detail := decodeReason(err)
		w.d.reject(w, m.Subject, reason, detail, m.Data)
		return
	}
	it.names = w.dec.Names()
	it.subject, it.data, it.seq = m.Subject, m.Data, 0
	w.queue <- it // never blocks: at most cap(queue) items exist
}

// decode decodes data into r and refuses a record time further ahead of
// the wall clock than the model's time_skew (one record with a wrong clock
// would otherwise empty a time-span window, whose eviction follows the
// newest record time, and stall the alert cooldowns).
func (w *worker) decode(data []byte, r *record.Record) error {
	if err := w.dec.Decode(data, r); err != nil {
		return err
	}
	w.watchSlots()
	if skew := w.cfg.TimeSkew.Std(); skew > 0 && r.HasT {
		// In milliseconds: a far-future t would overflow a Duration.
		if ahead := r.T - time.Now().UnixMilli(); ahead > skew.Milliseconds() {
			return &record.Error{Reason: record.ReasonTime,
				Detail: fmt.Sprintf(`"t" is %.0f s ahead of the wall clock (time_skew %v)`, float64(ahead)/1000, skew)}
		}
	}
	return nil
}

// intakeSeq decodes one message of the model's stream (sequence seq) and
// queues it, waiting for room: the stream is the buffer, so nothing is
// dropped. A record that cannot be decoded is queued too, marked, so that
// the model goroutine rejects it and moves the stream position past it in
// order. It returns false, queueing nothing, once stop is closed.
func (w *worker) intakeSeq(subject string, data []byte, seq uint64, stop <-chan struct{}) bool {
	var it *item
	select {
	case it = <-w.free:
	case <-stop:
		return false
	}
	it.reason, it.detail = "", ""
	if err := w.decode(data, &it.rec); err != nil {
		it.reason, it.detail = decodeReason(err)
	}
	it.names = w.dec.Names()
	it.subject, it.data, it.seq = subject, data, seq
	w.queue <- it
	return true
}

// publishFailed says that the model could not publish a new version: it is
// counted (lariat_model_publish_failures_total), shown by Ready (/readyz,
// degraded, with the reason) and on the status page, and logged at most
// once a minute. The last version that went out stays served.
func (w *worker) publishFailed(now time.Time, err error) {
	w.mm.PublishFailed.Inc()
	msg := err.Error()
	w.problem.Store(&msg)
	w.d.store.SetProblem(w.name, msg)
	if now.Sub(w.lastPubLog) >= time.Minute {
		w.lastPubLog = now
		w.log.Error("model not published; the previous version stays served", "err", err)
	}
}

// publishOK clears a publication problem once a version went out.
func (w *worker) publishOK() {
	if w.problem.Load() != nil {
		w.problem.Store(nil)
		w.d.store.SetProblem(w.name, "")
		w.log.Info("model publishes again")
	}
}

// skipped counts n records of the model's stream that it will never
// apply (retention discarded them first) and logs why.
func (w *worker) skipped(n uint64, why string) {
	w.mm.Skipped.Add(float64(n))
	w.log.Warn("records lost before they were applied: the stream's retention (intake.max_age, intake.max_bytes) was shorter than the time lariat was behind",
		"records", n, "detail", why)
}

// batch bounds the records applied in a row before the model goroutine
// looks at its tick and control channels again.
const batch = 256

// run is the model goroutine: it applies queued records, retunes, idles when
// the stream is quiet and publishes, until stop; then it applies every record
// still queued and publishes a final document.
func (w *worker) run() {
	defer close(w.done)
	tick := time.NewTicker(w.tick)
	defer tick.Stop()
	now := time.Now()
	w.lastSave = now
	if w.restored {
		w.publish(now, true) // the restored model is served and on the bus at once
	}
	for {
		select {
		case it := <-w.queue:
			t := w.applyAt(it, time.Now())
			// A busy stream: apply what is queued without going back to
			// the four-way select each time (bounded, so ticks still run).
			// One clock reading per record: the end of one is the start of
			// the next.
			for range batch {
				select {
				case it = <-w.queue:
					t = w.applyAt(it, t)
					continue
				default:
				}
				break
			}
			if w.d.ckpt != nil && w.saveDue(t) {
				w.save(t)
			}
		case f := <-w.ctl:
			f()
		case now := <-tick.C:
			w.onTick(now)
		case <-w.quit:
			for {
				select {
				case it := <-w.queue:
					if w.abandon {
						w.free <- it
						continue
					}
					w.apply(it)
					continue
				default:
				}
				break
			}
			if w.abandon {
				return
			}
			now := time.Now()
			if !w.unloading {
				w.publish(now, true)
			}
			if w.d.ckpt != nil {
				w.save(now)
			}
			return
		}
	}
}

// apply applies one record (pipeline.Pipeline.Apply) and hands its item
// back.
func (w *worker) apply(it *item) { w.applyAt(it, time.Now()) }

// applyAt is apply for a record whose application started at start (the
// model goroutine passes the end of the record before it in a burst, so
// each record costs one clock reading). It observes the time to apply the
// record (lariat_update_duration_seconds, including the retune that every
// retune.every-th record runs), sends the alerts the record raised and
// returns the time it finished.
func (w *worker) applyAt(it *item, start time.Time) time.Time {
	if it.reason != "" {
		w.d.reject(w, it.subject, it.reason, it.detail, it.data)
		w.done1(it)
		return time.Now()
	}
	st, err := w.pipe.Apply(&it.rec, it.names, start)
	if err != nil {
		reason, detail := decodeReason(err)
		w.d.reject(w, it.subject, reason, detail, it.data)
		w.done1(it)
		return time.Now()
	}
	w.mm.Accepted.Inc()
	w.done1(it)
	end := time.Now()
	w.mm.UpdateSeconds.Observe(end.Sub(start).Seconds())
	w.report(st)
	return end
}

// report sends what applying a record raised: alerts, the new ROC table,
// and log lines for a drift adaptation and a move of λ*.
func (w *worker) report(st *pipeline.Step) {
	for i := range st.Alerts {
		w.d.sendAlert(w, &st.Alerts[i])
	}
	if st.ROC != nil {
		w.d.store.SetROC(w.name, st.ROC)
	}
	if st.Moved {
		l := w.pipe.Ladder()
		w.log.Debug("λ* moved", "index", w.pipe.Current(), "lambda", l.Lambda(max(w.pipe.Current(), 0)))
	}
	if st.Adapted {
		w.log.Info("drift adaptation: window shrunk to post-change records",
			"train", w.pipe.Ladder().Len(), "holdout", w.pipe.HeldOutLen())
	}
}

// done1 moves the model's stream position past a durable record, applied
// or rejected, and hands the item back to the intake.
func (w *worker) done1(it *item) {
	if it.seq > 0 {
		w.pipe.SetPosition(it.seq)
	}
	w.sinceSave++
	it.data, it.names = nil, nil
	w.free <- it
}

// onTick runs idle steps when the queue is empty (the model has caught up,
// so spare time goes into converging on the current window: a quiet or
// moderate stream converges fully, a busy one spends nothing), then
// publishes if the model changed or the heartbeat is due.
func (w *worker) onTick(now time.Time) {
	if len(w.queue) == 0 && !w.d.noIdle {
		w.pipe.Idle(w.idleSteps)
	}
	w.publish(now, false)
	if w.d.ckpt != nil && w.saveDue(now) {
		w.save(now)
	}
}

// publish asks the pipeline for a new version and, when one is due, makes
// it the snapshot for predictions, stores it for HTTP and hands it to the
// outbox.
func (w *worker) publish(now time.Time, force bool) {
	w.pipe.RaiseVersion(w.versionFloor.Load())
	s, err := w.pipe.Publish(now, w.rejected.Load(), force)
	if err != nil {
		w.publishFailed(now, fmt.Errorf("cannot build a new version: %w", err))
		return
	}
	if s == nil {
		return
	}
	if err := w.d.store.SetModel(s.Doc); err != nil {
		w.publishFailed(now, fmt.Errorf("cannot store the new version: %w", err))
		return
	}
	w.publishOK()
	w.snap.Store(s)
	w.d.store.SetPath(w.name, s.PathLambdas, s.Path)
	w.mm.Published(s.Doc)
	w.d.out.put(s.Doc)
}

// exec runs f on the model goroutine and waits for it (tests and hooks that
// must read the live state). It returns false if the goroutine has stopped.
func (w *worker) exec(f func()) bool {
	done := make(chan struct{})
	select {
	case w.ctl <- func() { f(); close(done) }:
		<-done
		return true
	case <-w.done:
		return false
	}
}

// stop asks the model goroutine to drain its queue and return; the intake
// must have stopped already. Safe to call twice.
func (w *worker) stop() { w.stopOnce.Do(func() { close(w.quit) }) }

// wait waits for the model goroutine to return (at once if it never ran).
func (w *worker) wait(ctx context.Context) error {
	if !w.running.Load() {
		return nil
	}
	select {
	case <-w.done:
		return nil
	case <-ctx.Done():
		return fmt.Errorf("daemon: model %s did not stop: %w", w.name, ctx.Err())
	}
}

// decodeReason returns the reject reason and detail of a decoding error:
// the record package's reason token, or "malformed" for any other error.
func decodeReason(err error) (reason, detail string) {
	var re *record.Error
	if errors.As(err, &re) {
		return re.Reason, re.Detail
	}
	return record.ReasonMalformed, err.Error()
}
