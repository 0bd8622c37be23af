package daemon

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// predictor implements sink.Predictor on the models' latest published
// snapshots. It runs on HTTP goroutines and never touches a live ladder:
// each call decodes with a fresh decoder for the snapshot's feature names
// and evaluates the immutable online.Model.
type predictor struct{ d *Daemon }

var _ sink.Predictor = predictor{}

// Predict decodes body (the record format without a label: named "x" or
// array "v" in the model's feature order) and returns the linear predictor,
// the probability and alert decision for logistic models, each nonzero
// feature's contribution coef·x (a missing value is imputed with the mean),
// the sent names the model does not have and the model's features the
// record gave no value. A record with a value for none of the model's
// features is refused (an error wrapping sink.ErrBadRecord, 400): its
// prediction would be the mean one, whatever was sent.
func (p predictor) Predict(model string, body []byte) (*sink.Prediction, error) {
	w, ok := p.d.byName[model]
	if !ok {
		return nil, fmt.Errorf("%w: %s", sink.ErrUnknownModel, sink.QuoteInput(model))
	}
	s := w.snap.Load()
	if s == nil {
		return nil, fmt.Errorf("%w: %s has no published version yet", sink.ErrNotReady, model)
	}
	dec := record.NewDecoder(&record.DecoderOptions{
		Features:    s.Names,
		MaxFeatures: max(w.dim, len(s.Names)),
		Missing:     w.cfg.Missing,
		Unlabeled:   true,
		MaxBytes:    int(p.d.cfg.HTTP.MaxBodyBytes),
	})
	var r record.Record
	if err := dec.Decode(body, &r); err != nil {
		return nil, err
	}
	x := r.X[:len(s.Names)] // names unknown to the model contribute nothing
	unknown := dec.Names()[len(s.Names):]
	if len(s.Names) > 0 && !slices.ContainsFunc(x, func(v float64) bool { return !math.IsNaN(v) }) {
		return nil, fmt.Errorf("%w: the record has a value for none of the %d features of model %s (%s); unknown: %s",
			sink.ErrBadRecord, len(s.Names), model, listNames(s.Names, 5), listNames(unknown, 3))
	}
	out := predict(model, s, x)
	out.Unknown = append(out.Unknown, unknown...)
	return out, nil
}

// listNames lists the first n names, each quoted by sink.QuoteInput, and
// how many more there are.
func listNames(names []string, n int) string {
	if len(names) == 0 {
		return "none"
	}
	var b strings.Builder
	for i, name := range names[:min(n, len(names))] {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(sink.QuoteInput(name))
	}
	if len(names) > n {
		fmt.Fprintf(&b, " and %d more", len(names)-n)
	}
	return b.String()
}

// predict evaluates a snapshot on x (len(x) == len(s.Names)).
func predict(model string, s *pipeline.Snapshot, x []float64) *sink.Prediction {
	m := s.Model
	out := &sink.Prediction{
		Model:         model,
		Version:       s.Doc.Version,
		Eta:           m.Eta(x),
		Contributions: make(map[string]float64),
		Unknown:       []string{},
		Missing:       []string{},
	}
	for j, v := range x {
		if math.IsNaN(v) {
			out.Missing = append(out.Missing, s.Names[j])
		}
	}
	for j, c := range m.Coef {
		if c == 0 {
			continue
		}
		v := x[j]
		if math.IsNaN(v) {
			v = m.Mean[j]
		}
		out.Contributions[s.Names[j]] = c * v
	}
	if m.Loss == config.LossLogistic {
		prob := online.Sigmoid(out.Eta)
		out.Probability = &prob
		if t := s.Doc.Threshold; t != nil {
			v := t.Value
			pos := prob >= v
			out.Threshold, out.Positive = &v, &pos
		}
	}
	return out
}
