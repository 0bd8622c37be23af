package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
)

// streamIntake is the durable intake: each model's subject is captured by a
// JetStream stream of its own, <intake.stream_prefix>_<model>, and one
// reader goroutine per model reads it with an ordered consumer from the
// first sequence after the model's position (the last one its pipeline
// applied or rejected, restored from its checkpoint). The stream is the log
// and the checkpoint the position: a record published while lariat is down
// is read when it comes back, and a record applied before the last
// checkpoint is never read again. Readers wait for room in the model's
// queue instead of dropping (the stream is the buffer).
type streamIntake struct {
	d       *Daemon
	js      jetstream.JetStream
	stop    chan struct{}
	wg      sync.WaitGroup
	mu      sync.Mutex
	readers []jetstream.MessagesContext
}

// streamName returns the stream of model m.
func streamName(c *config.Config, m *config.Model) string {
	return c.Intake.StreamPrefix + "_" + m.Name
}

// errNoJetStream means the server does not answer JetStream requests.
var errNoJetStream = errors.New("daemon: the NATS server has no JetStream (intake.mode durable needs it; use auto or core)")

// newStreamIntake checks that JetStream answers and returns the intake.
func newStreamIntake(ctx context.Context, d *Daemon) (*streamIntake, error) {
	js, err := jetstream.New(d.nc)
	if err != nil {
		return nil, fmt.Errorf("daemon: JetStream: %w", err)
	}
	if _, err := js.AccountInfo(ctx); err != nil {
		return nil, fmt.Errorf("%w: %v", errNoJetStream, err)
	}
	return &streamIntake{d: d, js: js, stop: make(chan struct{})}, nil
}

// start ensures every model's stream (created, or updated to the
// configured subject and retention) and starts its reader.
func (s *streamIntake) start(ctx context.Context) error {
	for _, w := range s.d.workers {
		if err := s.startOne(ctx, w); err != nil {
			return fmt.Errorf("daemon: model %s: %w", w.name, err)
		}
	}
	for _, t := range s.d.templates {
		start := s.startTemplate
		if t.shared != nil {
			start = s.startShared
		}
		if err := start(ctx, t); err != nil {
			return fmt.Errorf("daemon: template %s: %w", t.name, err)
		}
	}
	return nil
}

func (s *streamIntake) startOne(ctx context.Context, w *worker) error {
	it, next, stored, name, err := s.open(ctx, w.cfg, "model", "checkpoint", w.startPos, w.log, w.skipped, min(w.cfg.Queue, 1024))
	if err != nil {
		return err
	}
	w.log.Info("reading the model's stream", "stream", name, "from", next, "stored", stored)
	s.wg.Go(func() {
		s.consume(it, next-1, w.log, w.skipped, func(subject string, data []byte, seq uint64) bool {
			return w.intakeSeq(subject, data, seq, s.stop)
		})
	})
	return nil
}

// consume hands every message of it to deliver, in stream order, until
// the intake stops or deliver returns false. A message delivered again
// after a consumer reset is passed over; a jump in the stream sequence
// (retention discarded records while the reader was behind) is reported
// to skipped. last is the sequence before the first one to deliver.
func (s *streamIntake) consume(it jetstream.MessagesContext, last uint64, log *slog.Logger,
	skipped func(n uint64, why string), deliver func(subject string, data []byte, seq uint64) bool) {
	for {
		m, err := it.Next()
		if err != nil {
			if errors.Is(err, jetstream.ErrMsgIteratorClosed) {
				return
			}
			select {
			case <-s.stop:
				return
			case <-time.After(100 * time.Millisecond): // heartbeat missed: the bus is down; the consumer recovers itself
			}
			continue
		}
		meta, err := m.Metadata()
		if err != nil {
			log.Error("stream message without metadata; skipped", "err", err)
			continue
		}
		seq := meta.Sequence.Stream
		if seq <= last {
			continue // delivered again after a consumer reset
		}
		if seq > last+1 && last > 0 {
			skipped(seq-last-1, fmt.Sprintf("the stream jumped from %d to %d (retention discarded records before they were read)", last, seq))
		}
		last = seq
		if !deliver(m.Subject(), m.Data(), seq) {
			return
		}
	}
}

// drain stops every reader and waits for them (messages a reader holds and
// has not queued are read again after the next start: the position only
// moves when the model goroutine has applied a record).
func (s *streamIntake) drain(ctx context.Context) error {
	close(s.stop)
	s.mu.Lock()
	for _, it := range s.readers {
		it.Stop()
	}
	s.mu.Unlock()
	done := make(chan struct{})
	go func() { s.wg.Wait(); close(done) }()
	select {
	case <-done:
		return nil
	case <-ctx.Done():
		return fmt.Errorf("daemon: stopping the stream readers: %w", ctx.Err())
	}
}

// describeStreams lists the streams, for the start-up log.
func describeStreams(c *config.Config) string {
	names := make([]string, len(c.Models)) // templates included
	for i := range c.Models {
		names[i] = streamName(c, &c.Models[i])
	}
	return strings.Join(names, ", ")
}

// open creates or updates the stream of the model entry m (a model, or a
// template with every instance key; kind names which in descriptions and
// logs) and starts an ordered reader of it after pos, the last sequence
// the entry's saved state (mark: its checkpoint or index) applied. A
// stream behind pos (deleted, or the server's store replaced, since: its
// sequences started again) is read from its start with a warning; records
// retention discarded before they were applied are reported to skipped.
// The reader is registered for drain. It returns the reader, the first
// sequence it reads, the records the stream holds and the stream's name.
func (s *streamIntake) open(ctx context.Context, m *config.Model, kind, mark string, pos uint64, log *slog.Logger,
	skipped func(n uint64, why string), pull int) (it jetstream.MessagesContext, next, stored uint64, name string, err error) {
	in := s.d.cfg.Intake
	name = streamName(s.d.cfg, m)
	st, err := s.js.CreateOrUpdateStream(ctx, jetstream.StreamConfig{
		Name:        name,
		Description: "lariat: labeled records of " + kind + " " + m.Name,
		Subjects:    []string{m.Subject},
		Retention:   jetstream.LimitsPolicy,
		Discard:     jetstream.DiscardOld,
		MaxAge:      in.MaxAge.Std(),
		MaxBytes:    in.MaxBytes,
		Storage:     jetstream.FileStorage,
	})
	if err != nil {
		return nil, 0, 0, name, fmt.Errorf("stream %s: %w", name, err)
	}
	info, err := st.Info(ctx)
	if err != nil {
		return nil, 0, 0, name, fmt.Errorf("stream %s: %w", name, err)
	}
	next = pos + 1
	if last := info.State.LastSeq; last < pos {
		log.Warn("the "+kind+"'s stream is behind its "+mark+" (deleted or replaced since); reading it from its first record",
			"stream", name, "stream_last", last, mark+"_position", pos)
		next = 1
	}
	if first := info.State.FirstSeq; info.State.Msgs > 0 && first > next {
		skipped(first-next, fmt.Sprintf("stream %s starts at %d, the %s's %s needs %d", name, first, kind, mark, next))
		next = first
	}
	cons, err := st.OrderedConsumer(ctx, jetstream.OrderedConsumerConfig{
		FilterSubjects: []string{m.Subject},
		DeliverPolicy:  jetstream.DeliverByStartSequencePolicy,
		OptStartSeq:    next,
	})
	if err != nil {
		return nil, 0, 0, name, fmt.Errorf("reader of stream %s: %w", name, err)
	}
	if it, err = cons.Messages(jetstream.PullMaxMessages(pull)); err != nil {
		return nil, 0, 0, name, fmt.Errorf("reader of stream %s: %w", name, err)
	}
	s.mu.Lock()
	s.readers = append(s.readers, it)
	s.mu.Unlock()
	return it, next, info.State.Msgs, name, nil
}
