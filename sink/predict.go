package sink

import (
	"fmt"
	"math"
	"slices"

	"lariat/online"
)

// Predict scores the raw feature values x (by name; absent or NaN =
// missing) with doc: the linear predictor, each nonzero feature's
// contribution, the names of x the model does not have (Unknown, sorted)
// and the model's features x has no value for (Missing), and, for a
// logistic model, the probability and its comparison with the threshold.
// It returns an error wrapping ErrBadRecord if the result is not finite.
// It does not decode records: a Predictor decodes the request body (the
// daemon's with the wire decoder of package record) and may use Predict to
// evaluate the published document on the values.
func Predict(doc *ModelDoc, x map[string]float64) (*Prediction, error) {
	eta, contrib := doc.Eta(x)
	if !finite(eta) {
		return nil, fmt.Errorf("%w: the linear predictor overflows (values too large)", ErrBadRecord)
	}
	for name, c := range contrib {
		if !finite(c) {
			return nil, fmt.Errorf("%w: the contribution of %s overflows", ErrBadRecord, name)
		}
	}
	pred := &Prediction{Model: doc.Model, Version: doc.Version, Eta: eta, Contributions: contrib,
		Unknown: []string{}, Missing: []string{}}
	for _, name := range doc.Features {
		if v, ok := x[name]; !ok || math.IsNaN(v) {
			pred.Missing = append(pred.Missing, name)
		}
	}
	for name := range x {
		if !slices.Contains(doc.Features, name) {
			pred.Unknown = append(pred.Unknown, name)
		}
	}
	slices.Sort(pred.Unknown)
	if doc.Logistic() {
		prob := online.Sigmoid(eta)
		pred.Probability = &prob
		if doc.Threshold != nil {
			t := doc.Threshold.Value
			pos := prob >= t
			pred.Threshold, pred.Positive = &t, &pos
		}
	}
	return pred, nil
}
