package daemon

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"log/slog"
	"math"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/window"
)

// reasonQueueFull is the reject reason of a record that found its model's
// queue full.
const reasonQueueFull = "queue_full"

// item is one decoded record on its way from the subscription goroutine to
// the model goroutine. Items cycle between worker.free and worker.queue, so
// the steady state allocates nothing of ours.
type item struct {
	rec   record.Record
	names []string  // the decoder's feature order when rec was decoded (shared, read-only)
	msg   *nats.Msg // the original message (bytes for rejects; ack hook for a durable intake)
}

// worker owns one model. Its intake half (intake) runs on the goroutine of
// the subscription that feeds it and owns the decoder; its model half (run)
// is the only goroutine that touches the ladder, the holdout, the chooser and
// the splitter. They meet only through the bounded queue.
type worker struct {
	d    *Daemon
	cfg  *config.Model
	name string
	log  *slog.Logger
	mm   *sink.ModelMetrics
	dim  int // ladder width: max_features (names not learned yet stay NaN)

	// intake side
	dec   *record.Decoder
	free  chan *item // empty items; empty channel = queue full
	queue chan *item // decoded records in arrival order

	// control
	ctl      chan func() // run a function on the model goroutine (tests, hooks)
	quit     chan struct{}
	done     chan struct{}
	running  atomic.Bool
	stopOnce sync.Once

	// model goroutine state
	ladder      *online.Ladder
	hold        *online.Holdout // nil when the holdout is off
	chooser     online.Chooser
	split       window.Splitter
	retuneEvery int
	idleSteps   int
	seq         uint64 // records applied (train + held out)
	held        uint64 // records applied to the holdout
	sinceRetune int
	scores      []online.Score
	obs         []observer
	recT        int64    // for observers: Unix ms of the record being applied, 0 without "t"
	recNames    []string // for observers: the feature names of the record being applied
	threshold   *sink.Threshold
	version     uint64
	last        *sink.ModelDoc
	lastPub     time.Time

	// shared
	rejected     atomic.Uint64
	versionFloor atomic.Uint64            // last version found in the KV bucket at start
	snap         atomic.Pointer[snapshot] // latest published model, for predictions
}

// snapshot is an immutable published model: what HTTP predictions use, so
// the HTTP goroutines never touch the live ladder.
type snapshot struct {
	doc   *sink.ModelDoc
	model *online.Model // trimmed to len(names) features
	names []string
}

func newWorker(d *Daemon, m *config.Model) (*worker, error) {
	loss, ok := online.LossByName(m.Loss)
	if !ok {
		return nil, fmt.Errorf("daemon: model %s: unknown loss %q", m.Name, m.Loss)
	}
	rule, err := online.ParseRule(m.Retune.Rule)
	if err != nil {
		return nil, fmt.Errorf("daemon: model %s: %w", m.Name, err)
	}
	dim := max(m.MaxFeatures, len(m.Features))
	h := fnv.New64a()
	h.Write([]byte(m.Name))
	lad, err := online.NewLadder(&online.Options{
		Loss:     loss,
		Penalty:  &online.Penalty{Mix: m.PenaltyMix()},
		Features: dim,
		Window:   m.Window.Records,
		Span:     m.Window.Span.Std(),
		Size:     m.Ladder.Size,
		Floor:    m.Ladder.Floor,
		Lambda:   m.Lambda,
		Steps:    m.Learner.Steps,
		Seed:     h.Sum64(),
		Learner:  m.Learner.Kind,
		HalfLife: m.Learner.HalfLife,
	})
	if err != nil {
		return nil, fmt.Errorf("daemon: model %s: %w", m.Name, err)
	}
	w := &worker{
		d: d, cfg: m, name: m.Name, dim: dim,
		log:   d.log.With("model", m.Name),
		mm:    d.metrics.Model(m.Name),
		ctl:   make(chan func()),
		quit:  make(chan struct{}),
		done:  make(chan struct{}),
		free:  make(chan *item, m.Queue),
		queue: make(chan *item, m.Queue),
		dec: record.NewDecoder(&record.DecoderOptions{
			Features:    m.Features,
			MaxFeatures: dim,
			Logistic:    m.Logistic(),
			Missing:     m.Missing,
		}),
		ladder:      lad,
		chooser:     online.Chooser{Rule: rule},
		split:       window.Splitter{Every: m.Holdout.Every, ByKey: m.Holdout.ByKey},
		retuneEvery: m.Retune.Every,
		idleSteps:   m.Learner.IdleSteps,
	}
	if m.HoldoutOff() {
		w.split.Every = -1 // window.Splitter: < 2 (and not 0) disables the split
	} else {
		w.hold = online.NewHoldout(dim, m.Holdout.Records)
	}
	if m.Logistic() {
		w.threshold = &sink.Threshold{Value: m.Threshold.Value, Mode: m.Threshold.Mode, Target: m.Threshold.Target}
	}
	for range m.Queue {
		w.free <- &item{rec: record.Record{X: make([]float64, 0, dim)}}
	}
	w.mm.QueueDepthFunc(func() int { return len(w.queue) })
	w.obs = d.observersFor(w)
	return w, nil
}

// intake decodes one message and queues it for the model goroutine, or
// rejects it. It runs on the subscription's goroutine and never blocks.
func (w *worker) intake(m *nats.Msg) {
	var it *item
	select {
	case it = <-w.free:
	default:
		w.mm.QueueDropped.Inc()
		w.d.reject(w, m.Subject, reasonQueueFull, fmt.Sprintf("queue of %d records is full", cap(w.queue)), m.Data)
		return
	}
	if err := w.dec.Decode(m.Data, &it.rec); err != nil {
		w.free <- it
		reason, detail := decodeReason(err)
		w.d.reject(w, m.Subject, reason, detail, m.Data)
		return
	}
	it.names = w.dec.Names()
	for len(it.rec.X) < w.dim { // names not learned yet are missing
		it.rec.X = append(it.rec.X, math.NaN())
	}
	it.msg = m
	w.queue <- it // never blocks: at most cap(queue) items exist
}

// batch bounds the records applied in a row before the model goroutine
// looks at its tick and control channels again.
const batch = 256

// run is the model goroutine: it applies queued records, retunes, idles when
// the stream is quiet and publishes, until stop; then it applies every record
// still queued and publishes a final document.
func (w *worker) run() {
	defer close(w.done)
	tick := time.NewTicker(w.d.tick)
	defer tick.Stop()
	var names []string
	for {
		select {
		case it := <-w.queue:
			names = it.names
			t := w.applyAt(it, time.Now())
			// A busy stream: apply what is queued without going back to
			// the four-way select each time (bounded, so ticks still run).
			// One clock reading per record: the end of one is the start of
			// the next.
			for range batch {
				select {
				case it = <-w.queue:
					names = it.names
					t = w.applyAt(it, t)
					continue
				default:
				}
				break
			}
		case f := <-w.ctl:
			f()
		case now := <-tick.C:
			w.onTick(now, names)
		case <-w.quit:
			for {
				select {
				case it := <-w.queue:
					names = it.names
					w.apply(it)
					continue
				default:
				}
				break
			}
			w.publish(time.Now(), names, true)
			return
		}
	}
}

// apply routes one record to the holdout or the ladder (test-then-train),
// counts it, and retunes every retune.every records.
func (w *worker) apply(it *item) { w.applyAt(it, time.Now()) }

// applyAt is apply for a record whose application started at start (the
// model goroutine passes the end of the record before it in a burst, so
// each record costs one clock reading). It observes the time to apply the
// record (lariat_update_duration_seconds, retunes excluded) and returns the
// time it finished, after the retune if one ran.
func (w *worker) applyAt(it *item, start time.Time) time.Time {
	r := it.rec.Learn()
	heldOut := w.split.Holdout(w.seq, it.rec.Key)
	// Test-then-train: the current model's loss on the record before it
	// learns from it (an honest out-of-sample loss for the drift watch).
	var loss float64
	if len(w.obs) > 0 {
		loss = w.ladder.Loss().Value(r.Y, w.ladder.Eta(max(w.current(), 0), r.X))
	}
	var err error
	if heldOut {
		err = w.hold.Add(r)
	} else {
		err = w.ladder.Add(r)
	}
	if err != nil {
		return w.rejectApplied(it, learnerReason(err), err.Error())
	}
	w.seq++
	if heldOut {
		w.held++
	}
	w.mm.Accepted.Inc()
	w.recT, w.recNames = r.T, it.names
	for _, o := range w.obs {
		o.observe(r.X, r.Y, loss, heldOut)
	}
	w.done1(it)
	end := time.Now()
	w.mm.UpdateSeconds.Observe(end.Sub(start).Seconds())
	if w.sinceRetune++; w.sinceRetune >= w.retuneEvery {
		w.retune()
		end = time.Now()
	}
	return end
}

// rejectApplied rejects a record on the model goroutine (counted and
// republished like every reject; the model is untouched), hands its item
// back and returns the time it finished.
func (w *worker) rejectApplied(it *item, reason, detail string) time.Time {
	w.d.reject(w, it.msg.Subject, reason, detail, it.msg.Data)
	w.done1(it)
	return time.Now()
}

// done1 hands an item back to the intake. A durable (JetStream) intake
// would acknowledge it.msg here, after the record is applied or rejected.
func (w *worker) done1(it *item) {
	it.msg = nil
	it.names = nil
	w.free <- it
}

// learnerReason maps the ladder's validation errors onto reject reasons.
func learnerReason(err error) string {
	switch {
	case errors.Is(err, online.ErrDimension):
		return record.ReasonDimension
	case errors.Is(err, online.ErrNotFinite):
		return record.ReasonNotFinite
	case errors.Is(err, online.ErrLabel):
		return record.ReasonLabel
	case errors.Is(err, online.ErrWeight):
		return record.ReasonWeight
	}
	return "invalid"
}

// retune scores the ladder on the held-out ring and lets the chooser move
// λ* (with hysteresis). A fixed-λ model or an empty holdout skips it.
func (w *worker) retune() {
	w.sinceRetune = 0
	if w.hold == nil || w.hold.Len() == 0 || w.ladder.Len() == 0 {
		return
	}
	w.scores = w.ladder.Score(w.hold, w.scores[:0])
	idx, changed := w.chooser.Update(w.scores)
	if changed {
		w.log.Debug("λ* moved", "index", idx, "lambda", w.ladder.Lambda(idx))
	}
	for _, o := range w.obs {
		o.retuned(w.scores, idx, changed)
	}
}

// onTick runs idle steps when the queue is empty (the model has caught up,
// so spare time goes into converging on the current window: a quiet or
// moderate stream converges fully, a busy one spends nothing), then
// publishes if the model changed or the heartbeat is due.
func (w *worker) onTick(now time.Time, names []string) {
	if len(w.queue) == 0 && w.idleSteps > 0 && w.ladder.Len() > 0 && !w.d.noIdle {
		w.ladder.Idle(w.idleSteps)
	}
	w.publish(now, names, false)
}

// publish builds the current document and publishes it when it changed
// beyond the tolerance, when the heartbeat is due, or when forced.
func (w *worker) publish(now time.Time, names []string, force bool) {
	cur := w.current()
	if cur < 0 || w.ladder.Len() == 0 || len(names) == 0 {
		return
	}
	if !force && now.Sub(w.lastPub) < w.d.minPublish {
		return // a busy stream moves coefficients all the time: at most one version per minPublish
	}
	m := w.ladder.Model(cur)
	trim(&m, len(names))
	next := max(w.version, w.versionFloor.Load()) + 1
	doc, err := sink.NewModelDoc(&sink.DocInput{
		Name:      w.name,
		Version:   next,
		Features:  names,
		Model:     &m,
		Scores:    w.ladderNow(),
		Holdout:   w.holdLen(),
		Rejected:  w.rejected.Load(),
		Threshold: w.thresholdNow(),
		Updated:   now,
	})
	if err != nil {
		w.log.Error("model not published", "err", err)
		return
	}
	for _, o := range w.obs {
		o.annotate(doc)
	}
	heartbeat := w.cfg.Publish.Heartbeat.Std()
	if !force && !sink.Changed(w.last, doc, w.cfg.Publish.Tolerance) &&
		(heartbeat <= 0 || now.Sub(w.lastPub) < heartbeat) {
		return
	}
	w.version = next
	w.last = doc
	w.lastPub = now
	w.snap.Store(&snapshot{doc: doc, model: &m, names: names})
	if err := w.d.store.SetModel(doc); err != nil {
		w.log.Error("model not stored", "err", err)
	}
	w.mm.Published(doc)
	w.d.out.put(doc)
}

// ladderNow returns the last retune's scores with each member's current λ
// and support size: the ladder re-anchors as the window moves, so the λ
// grid of the document must be the one the published model belongs to,
// while the held-out metrics are those of the last retune.
func (w *worker) ladderNow() []online.Score {
	if len(w.scores) == 0 {
		return nil
	}
	out := slices.Clone(w.scores)
	for i := range out {
		if j := out[i].Index; j >= 0 && j < w.ladder.Size() {
			out[i].Lambda, out[i].Nonzero = w.ladder.Lambda(j), w.ladder.Nonzero(j)
		}
	}
	return out
}

// current returns the ladder index of the current model: the chooser's
// choice, 0 for a single-member (fixed λ) ladder, or −1 before the first
// retune has chosen (nothing is published until then).
func (w *worker) current() int {
	if c := w.chooser.Current(); c >= 0 {
		return c
	}
	if w.ladder.Size() == 1 {
		return 0
	}
	return -1
}

func (w *worker) holdLen() int {
	if w.hold == nil {
		return 0
	}
	return w.hold.Len()
}

func (w *worker) thresholdNow() *sink.Threshold {
	if w.threshold == nil {
		return nil
	}
	t := *w.threshold
	return &t
}

// trim cuts a snapshot to its first n features (the names learned so far;
// the columns past them have never seen a value and have coefficient 0).
func trim(m *online.Model, n int) {
	if n >= len(m.Coef) {
		return
	}
	m.Coef = m.Coef[:n]
	m.Standardized = m.Standardized[:n]
	m.Mean = m.Mean[:n]
	m.Std = m.Std[:n]
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
