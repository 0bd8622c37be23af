package daemon

import "context"

// startTemplate ensures the template's stream, <stream_prefix>_<template>,
// capturing its subject, and starts one reader over every key from the
// first sequence after the template index's floor.
func (s *streamIntake) startTemplate(ctx context.Context, t *template) error {
	pt := t.parts[0]
	it, next, stored, name, err := s.open(ctx, t.cfg, "template", "index", pt.floor, t.log, t.skipped, 1024)
	if err != nil {
		return err
	}
	t.log.Info("reading the template's stream", "stream", name, "from", next, "stored", stored, "instances", len(t.inst))
	s.wg.Go(func() {
		s.consume(it, next-1, t.log, t.skipped, func(subject string, data []byte, seq uint64) bool {
			return t.dispatch(pt, subject, data, seq, s.stop, nil)
		})
	})
	return nil
}

// skipped counts records of the template's stream that retention discarded
// before they were applied.
func (t *template) skipped(n uint64, why string) {
	t.mm.Skipped.Add(float64(n))
	t.log.Warn("records lost before they were applied: the stream's retention (intake.max_age, intake.max_bytes) was shorter than the time lariat was behind",
		"records", n, "detail", why)
}
