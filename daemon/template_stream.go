package daemon

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go/jetstream"
)

// startTemplate ensures the template's stream, <stream_prefix>_<template>,
// capturing its subject, and starts one reader over every key from the
// first sequence after the template index's floor.
func (s *streamIntake) startTemplate(ctx context.Context, t *template) error {
	it, next, stored, name, err := s.open(ctx, t.cfg, "template", "index", t.floor, t.log, t.skipped, 1024)
	if err != nil {
		return err
	}
	s.mu.Lock()
	s.readers = append(s.readers, it)
	s.mu.Unlock()
	t.log.Info("reading the template's stream", "stream", name, "from", next, "stored", stored, "instances", len(t.inst))
	s.wg.Go(func() { s.readTemplate(t, it, next-1) })
	return nil
}

// readTemplate hands every message of it to the template's dispatch in
// stream order until the intake stops.
func (s *streamIntake) readTemplate(t *template, it jetstream.MessagesContext, last uint64) {
	for {
		m, err := it.Next()
		if err != nil {
			if errors.Is(err, jetstream.ErrMsgIteratorClosed) {
				return
			}
			select {
			case <-s.stop:
				return
			case <-time.After(100 * time.Millisecond):
			}
			continue
		}
		meta, err := m.Metadata()
		if err != nil {
			t.log.Error("stream message without metadata; skipped", "err", err)
			continue
		}
		seq := meta.Sequence.Stream
		if seq <= last {
			continue
		}
		if seq > last+1 && last > 0 {
			t.skipped(seq-last-1, fmt.Sprintf("the stream jumped from %d to %d (retention discarded records before they were read)", last, seq))
		}
		last = seq
		if !t.dispatch(m.Subject(), m.Data(), seq, s.stop, nil) {
			return
		}
	}
}

// skipped counts records of the template's stream that retention discarded
// before they were applied.
func (t *template) skipped(n uint64, why string) {
	t.mm.Skipped.Add(float64(n))
	t.log.Warn("records lost before they were applied: the stream's retention (intake.max_age, intake.max_bytes) was shorter than the time lariat was behind",
		"records", n, "detail", why)
}
