package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"sync"
	"sync/atomic"
	"time"

	"lariat/sink"
)

// outbox decouples the model goroutines from NATS round trips: a model hands
// over its newest document and goes on; one goroutine publishes on the bus
// and into the key-value bucket. Documents of a model not yet sent are
// replaced by newer ones (the bus only needs the latest).
type outbox struct {
	d       *Daemon
	mu      sync.Mutex
	pending map[string]*sink.ModelDoc
	order   []string // names in pending, oldest first
	closed  bool
	wake    chan struct{} // capacity 1
	done    chan struct{}
	running atomic.Bool
}

func newOutbox(d *Daemon) *outbox {
	return &outbox{d: d, pending: make(map[string]*sink.ModelDoc), wake: make(chan struct{}, 1), done: make(chan struct{})}
}

// put queues doc, replacing any unsent document of the same model.
func (o *outbox) put(doc *sink.ModelDoc) {
	o.mu.Lock()
	if _, ok := o.pending[doc.Model]; !ok {
		o.order = append(o.order, doc.Model)
	}
	o.pending[doc.Model] = doc
	o.mu.Unlock()
	select {
	case o.wake <- struct{}{}:
	default:
	}
}

// close makes run publish what is pending and return; safe to call twice.
func (o *outbox) close() {
	o.mu.Lock()
	o.closed = true
	o.mu.Unlock()
	select {
	case o.wake <- struct{}{}:
	default:
	}
}

// run publishes documents until close. Documents that arrive before the
// publisher is up wait (the newest per model) and go out once it is.
func (o *outbox) run() {
	defer close(o.done)
	for range o.wake {
		o.mu.Lock()
		closed := o.closed
		p := o.d.pub.Load()
		var batch []*sink.ModelDoc
		if p != nil {
			for _, name := range o.order {
				batch = append(batch, o.pending[name])
			}
			clear(o.pending)
			o.order = o.order[:0]
		}
		o.mu.Unlock()
		for _, doc := range batch {
			ctx, cancel := context.WithTimeout(context.Background(), o.d.publishTimeout())
			if err := p.PublishModel(ctx, doc); err != nil {
				o.d.log.Warn("model publication failed", "model", doc.Model, "version", doc.Version, "err", err)
			}
			cancel()
		}
		if closed {
			return
		}
	}
}

// kick wakes run, e.g. once the publisher is up.
func (o *outbox) kick() {
	select {
	case o.wake <- struct{}{}:
	default:
	}
}

// publishTimeout bounds one publication (NATS publish and KV put).
func (d *Daemon) publishTimeout() time.Duration { return 5 * time.Second }

// wait waits for run to return.
func (o *outbox) wait(ctx context.Context) error {
	if !o.running.Load() {
		return nil
	}
	select {
	case <-o.done:
		return nil
	case <-ctx.Done():
		return fmt.Errorf("daemon: final model publication: %w", ctx.Err())
	}
}

// readVersions reads the last published version of every model from the
// key-value bucket, so versions stay monotone across restarts.
func (o *outbox) readVersions(ctx context.Context, p *sink.Publisher) {
	kv := p.KV()
	if kv == nil {
		return
	}
	for _, w := range o.d.workers {
		e, err := kv.Get(ctx, w.name)
		if err != nil {
			continue // not found (first run) or unavailable: start at 1
		}
		var v struct {
			Version uint64 `json:"version"`
		}
		if err := json.Unmarshal(e.Value(), &v); err != nil {
			o.d.log.Warn("stored model unreadable", "model", w.name, "err", errors.Unwrap(err))
			continue
		}
		w.versionFloor.Store(v.Version)
	}
}
