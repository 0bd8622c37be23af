package daemon

import (
	"errors"
	"fmt"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"

	"lariat/daemon/pipeline"
	"lariat/sink"
)

// scoring subscribes a logistic model's score_subject and runs its
// pipeline.Scorer on the subscription's goroutine (nats.go delivers one
// message at a time per subscription) against the latest published
// snapshot: it never touches the live pipeline.
type scoring struct {
	d *Daemon
	w *worker

	subscribed atomic.Bool
	sc         *pipeline.Scorer

	scored, suppressed prometheus.Counter
}

// scoredDesc and suppressedDesc describe the scoring counters (by model),
// registered once per registry.
var (
	scoredDesc = prometheus.CounterOpts{
		Name: "lariat_records_scored_total",
		Help: "Unlabeled records scored on a model's score_subject.",
	}
	suppressedDesc = prometheus.CounterOpts{
		Name: "lariat_prediction_alerts_suppressed_total",
		Help: "Prediction alerts dropped by the per-model rate limit.",
	}
)

// newScoring returns the scoring of w, or nil when the model has no
// score_subject.
func newScoring(w *worker) *scoring {
	sc := pipeline.NewScorer(w.cfg)
	if sc == nil {
		return nil
	}
	s := &scoring{d: w.d, w: w, sc: sc}
	s.scored = counterVec(w.d, scoredDesc).WithLabelValues(w.name)
	s.suppressed = counterVec(w.d, suppressedDesc).WithLabelValues(w.name)
	return s
}

// counterVec registers (once per registry) and returns a counter vector by
// model.
func counterVec(d *Daemon, o prometheus.CounterOpts) *prometheus.CounterVec {
	v := prometheus.NewCounterVec(o, []string{"model"})
	if err := d.reg.Register(v); err != nil {
		var are prometheus.AlreadyRegisteredError
		if errors.As(err, &are) {
			if old, ok := are.ExistingCollector.(*prometheus.CounterVec); ok {
				return old
			}
		}
		d.log.Error("metric not registered", "name", o.Name, "err", err)
	}
	return v
}

// subscribeScoring subscribes every model's score_subject through d.in
// (so shutdown drains it and its drops are counted); Run calls it right
// after subscribing the models' subjects.
func (d *Daemon) subscribeScoring() error {
	for _, w := range d.workers {
		if s := w.scoring; s != nil {
			if err := s.subscribe(); err != nil {
				return err
			}
		}
	}
	return nil
}

// subscribe subscribes the score subject (once).
func (s *scoring) subscribe() error {
	if !s.subscribed.CompareAndSwap(false, true) {
		return nil
	}
	subj := s.w.cfg.ScoreSubject
	if err := s.d.in.subscribe(subj, []*worker{s.w}, s.handle); err != nil {
		return fmt.Errorf("daemon: subscribing score subject %s: %w", subj, err)
	}
	s.w.log.Info("scoring unlabeled records", "subject", subj)
	return nil
}

// handle scores one message.
func (s *scoring) handle(m *nats.Msg) {
	w := s.w
	snap := w.snap.Load()
	if snap == nil {
		s.d.reject(w, m.Subject, reasonNotReady, "no model published yet to score against", m.Data)
		return
	}
	a, suppressed, err := s.sc.Score(snap, m.Data, time.Now())
	if err != nil {
		reason, detail := decodeReason(err)
		s.d.reject(w, m.Subject, reason, detail, m.Data)
		return
	}
	s.scored.Inc()
	if suppressed {
		s.suppressed.Inc()
	}
	if a != nil {
		s.d.sendAlert(w, a)
	}
}

// sendAlert validates a, keeps it in the store (GET /v1/alerts), counts it
// (lariat_alerts_total{model,kind}) and publishes it on
// <prefix>.alert.<model>. It is safe from any goroutine; publication goes
// through nats.go's buffer and does not wait for the server.
func (d *Daemon) sendAlert(w *worker, a *sink.Alert) {
	if err := a.Validate(); err != nil {
		w.log.Error("alert dropped", "kind", a.Kind, "err", err)
		return
	}
	d.store.AddAlert(*a)
	w.mm.Alert(a.Kind)
	w.log.Info("alert", "kind", a.Kind, "severity", a.Severity, "statistic", a.Statistic,
		"threshold", a.Threshold, "features", a.Features, "seq", a.Seq, "message", a.Message)
	if p := d.pub.Load(); p != nil {
		if err := p.PublishAlert(a); err != nil {
			w.log.Warn("alert not published", "kind", a.Kind, "err", err)
		}
	}
}
