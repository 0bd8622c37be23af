package daemon

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"

	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// Rate limit of prediction alerts, per model: a token bucket of
// predictionBurst tokens refilled at predictionRate per second of wall
// clock. A prediction over the threshold with no token left is counted in
// lariat_prediction_alerts_suppressed_total{model} and dropped. Prediction
// alerts do not use drift.cooldown: each record is its own event, and the
// bucket only protects the bus and the people reading the alerts from a
// flood (a stuck sensor can push every record over the threshold).
const (
	predictionBurst = 10
	predictionRate  = 1.0
	// topContributions is how many features a prediction alert names.
	topContributions = 5
)

// scorer scores the unlabeled records of a logistic model's score_subject
// against its alert threshold. It runs on the subscription's goroutine
// (nats.go delivers one message at a time per subscription), owns its
// decoder and bucket, and reads only the latest published, immutable
// snapshot of the model: it never touches the live ladder, so scoring does
// not slow the learner and sees a new model or threshold at the next
// publication.
type scorer struct {
	d *Daemon
	w *worker

	subscribed atomic.Bool

	dec    *record.Decoder
	known  int // len(names) the decoder was built for
	rec    record.Record
	bucket tokenBucket
	seq    uint64
	order  []int // scratch: feature indices by |contribution|

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

// newScorer returns the scorer of w, or nil when the model has no
// score_subject.
func newScorer(w *worker) *scorer {
	if w.cfg.ScoreSubject == "" || !w.cfg.Logistic() {
		return nil
	}
	s := &scorer{d: w.d, w: w, bucket: tokenBucket{tokens: predictionBurst}}
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

// scorerOf returns w's scorer, or nil.
func scorerOf(w *worker) *scorer {
	for _, o := range w.obs {
		if t, ok := o.(*tuner); ok {
			return t.scoring
		}
	}
	return nil
}

// subscribeScoring subscribes every model's score_subject through d.in
// (so shutdown drains it and its drops are counted); Run calls it right
// after subscribing the models' subjects.
func (d *Daemon) subscribeScoring() error {
	for _, w := range d.workers {
		if s := scorerOf(w); s != nil {
			if err := s.subscribe(); err != nil {
				return err
			}
		}
	}
	return nil
}

// subscribe subscribes the score subject (once).
func (s *scorer) subscribe() error {
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
func (s *scorer) handle(m *nats.Msg) {
	w := s.w
	snap := w.snap.Load()
	if snap == nil {
		s.d.reject(w, m.Subject, "not_ready", "no model published yet to score against", m.Data)
		return
	}
	if len(snap.names) != s.known || s.dec == nil {
		s.dec = scoringDecoder(w, snap.names)
		s.known = len(snap.names)
	}
	if err := s.dec.Decode(m.Data, &s.rec); err != nil {
		reason, detail := decodeReason(err)
		s.d.reject(w, m.Subject, reason, detail, m.Data)
		return
	}
	s.seq++
	s.scored.Inc()
	x := s.rec.X[:min(len(s.rec.X), len(snap.names))]
	p, thr, over := overThreshold(snap, x)
	if !over {
		return
	}
	if !s.bucket.take(time.Now()) {
		s.suppressed.Inc()
		return
	}
	s.d.sendAlert(w, s.alert(snap, x, p, thr))
}

// scoringDecoder builds an unlabeled decoder with the model's feature
// order: the configured list, then the names the model learned.
func scoringDecoder(w *worker, names []string) *record.Decoder {
	fixed := len(w.cfg.Features)
	return record.NewDecoder(&record.DecoderOptions{
		Features:    w.cfg.Features,
		Learned:     names[min(fixed, len(names)):],
		MaxFeatures: max(w.dim, len(names)),
		Missing:     w.cfg.Missing,
		Unlabeled:   true,
	})
}

// overThreshold returns the probability of x under the snapshot, the
// threshold, and whether p ≥ threshold.
func overThreshold(snap *snapshot, x []float64) (p, thr float64, over bool) {
	m := snap.model
	p = online.Sigmoid(etaPrefix(m, x))
	thr = 0.5
	if t := snap.doc.Threshold; t != nil {
		thr = t.Value
	}
	return p, thr, p >= thr
}

// etaPrefix evaluates m on x, which may be shorter than the model (the
// missing tail counts at the mean, contributing nothing).
func etaPrefix(m *online.Model, x []float64) float64 {
	eta := m.Intercept
	for j, c := range m.Coef {
		v := m.Mean[j]
		if j < len(x) && !math.IsNaN(x[j]) {
			v = x[j]
		}
		eta += c * v
	}
	return eta
}

// alert builds a prediction alert: the probability, the threshold, and the
// (at most) five features that contributed most, by |coef·(x − mean)|, the
// record's contribution to η relative to a record at the window means
// (η = η(mean) + Σ coef_j·(x_j − mean_j); a missing value contributes 0).
func (s *scorer) alert(snap *snapshot, x []float64, p, thr float64) *sink.Alert {
	m := snap.model
	contrib := func(j int) float64 {
		if j >= len(x) || math.IsNaN(x[j]) {
			return 0
		}
		return m.Coef[j] * (x[j] - m.Mean[j])
	}
	s.order = s.order[:0]
	for j, c := range m.Coef {
		if c != 0 && contrib(j) != 0 {
			s.order = append(s.order, j)
		}
	}
	slices.SortStableFunc(s.order, func(a, b int) int {
		ca, cb := math.Abs(contrib(a)), math.Abs(contrib(b))
		switch {
		case ca > cb:
			return -1
		case ca < cb:
			return 1
		}
		return 0
	})
	top := s.order[:min(topContributions, len(s.order))]
	a := &sink.Alert{
		Model:         s.w.name,
		Kind:          sink.KindPrediction,
		Severity:      sink.SeverityWarning,
		Statistic:     p,
		Threshold:     thr,
		Windows:       sink.AlertWindows{Train: snap.doc.Records.Window, Holdout: snap.doc.Records.Holdout},
		Seq:           s.seq,
		Probability:   &p,
		Contributions: make(map[string]float64, len(top)),
	}
	if s.rec.HasT {
		a.Time = time.UnixMilli(s.rec.T).UTC()
	}
	for _, j := range top {
		name := featureName(snap.names, j)
		a.Features = append(a.Features, name)
		a.Contributions[name] = contrib(j)
	}
	a.Message = fmt.Sprintf("p = %.3f ≥ threshold %.3f (model version %d); top contributions coef·(x − mean): %v",
		p, thr, snap.doc.Version, a.Features)
	return a
}

// tokenBucket is a token bucket on the wall clock: up to predictionBurst
// tokens, refilled at predictionRate per second.
type tokenBucket struct {
	tokens float64
	last   time.Time
}

// take refills the bucket for the time since the last call and takes a
// token if one is left.
func (b *tokenBucket) take(now time.Time) bool {
	if !b.last.IsZero() {
		if dt := now.Sub(b.last).Seconds(); dt > 0 {
			b.tokens = min(predictionBurst, b.tokens+dt*predictionRate)
		}
	}
	b.last = now
	if b.tokens < 1 {
		return false
	}
	b.tokens--
	return true
}
