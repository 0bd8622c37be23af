package pipeline

import (
	"fmt"
	"math"
	"slices"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// Rate limit of prediction alerts, per model: a token bucket of
// predictionBurst tokens refilled at predictionRate per second of the time
// passed in. A prediction over the threshold with no token left is held
// back (Score reports it as suppressed). Prediction alerts do not use
// drift.cooldown: each record is its own event, and the bucket only
// protects the bus and the people reading the alerts from a flood (a stuck
// sensor can push every record over the threshold).
const (
	predictionBurst = 10
	predictionRate  = 1.0
	// topContributions is how many features a prediction alert names.
	topContributions = 5
)

// Scorer scores the unlabeled records of a logistic model's score_subject
// against the model's latest published Snapshot and its alert threshold.
// It never touches the live pipeline, so scoring does not slow the learner
// and sees a new model or threshold at the next publication. It owns its
// decoder and rate limit; one goroutine owns it.
type Scorer struct {
	cfg    *config.Model
	dim    int
	dec    *record.Decoder
	known  []string // the names the decoder was built for
	rec    record.Record
	bucket tokenBucket
	seq    uint64
	order  []int // scratch: feature indices by |contribution|
}

// NewScorer returns the scorer of model m, or nil when m has no
// score_subject or is not logistic.
func NewScorer(m *config.Model) *Scorer {
	if m.ScoreSubject == "" || !m.Logistic() {
		return nil
	}
	return &Scorer{cfg: m, dim: Width(m), bucket: tokenBucket{tokens: predictionBurst}}
}

// Score decodes data (the record format; "y" is optional and ignored) and
// scores it with snap. It returns a prediction alert when the probability
// reaches the threshold and the rate limit (on the time now) lets one out;
// suppressed reports an alert held back by the rate limit. A record that
// cannot be decoded gives the decoder's *record.Error.
func (s *Scorer) Score(snap *Snapshot, data []byte, now time.Time) (a *sink.Alert, suppressed bool, err error) {
	if s.dec == nil || !sameNames(snap.Names, s.known) {
		// A slot that changed hands keeps the length: compare the names.
		s.dec = s.decoder(snap.Names)
		s.known = snap.Names
	}
	if err := s.dec.Decode(data, &s.rec); err != nil {
		return nil, false, err
	}
	s.seq++
	x := s.rec.X[:min(len(s.rec.X), len(snap.Names))]
	p, thr, over := overThreshold(snap, x)
	if !over {
		return nil, false, nil
	}
	if !s.bucket.take(now) {
		return nil, true, nil
	}
	return s.alert(snap, x, p, thr), false, nil
}

// Scored returns the number of records scored.
func (s *Scorer) Scored() uint64 { return s.seq }

// sameNames reports whether a and b are the same names in the same order.
func sameNames(a, b []string) bool {
	if len(a) == len(b) && (len(a) == 0 || &a[0] == &b[0]) {
		return true
	}
	return slices.Equal(a, b)
}

// decoder builds an unlabeled decoder with the model's feature order: the
// configured list, then the names the model learned.
func (s *Scorer) decoder(names []string) *record.Decoder {
	fixed := len(s.cfg.Features)
	return record.NewDecoder(&record.DecoderOptions{
		Features:    s.cfg.Features,
		Learned:     names[min(fixed, len(names)):],
		MaxFeatures: max(s.dim, len(names)),
		Missing:     s.cfg.Missing,
		Unlabeled:   true,
	})
}

// overThreshold returns the probability of x under the snapshot, the
// threshold, and whether p ≥ threshold.
func overThreshold(snap *Snapshot, x []float64) (p, thr float64, over bool) {
	p = online.Sigmoid(etaPrefix(snap.Model, x))
	thr = 0.5
	if t := snap.Doc.Threshold; t != nil {
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
func (s *Scorer) alert(snap *Snapshot, x []float64, p, thr float64) *sink.Alert {
	m := snap.Model
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
		Model:         s.cfg.Name,
		Kind:          sink.KindPrediction,
		Severity:      sink.SeverityWarning,
		Statistic:     p,
		Threshold:     thr,
		Windows:       sink.AlertWindows{Train: snap.Doc.Records.Window, Holdout: snap.Doc.Records.Holdout},
		Seq:           s.seq,
		Probability:   &p,
		Contributions: make(map[string]float64, len(top)),
	}
	if s.rec.HasT {
		a.Time = time.UnixMilli(s.rec.T).UTC()
	}
	for _, j := range top {
		name := featureName(snap.Names, j)
		a.Features = append(a.Features, name)
		a.Contributions[name] = contrib(j)
	}
	a.Message = fmt.Sprintf("p = %.3f ≥ threshold %.3f (model version %d); top contributions coef·(x − mean): %v",
		p, thr, snap.Doc.Version, a.Features)
	return a
}

// tokenBucket is a token bucket on the time its caller passes in: up to
// predictionBurst tokens, refilled at predictionRate per second.
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
