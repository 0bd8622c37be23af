package sink

import (
	"fmt"

	"lariat/online"
)

// Predict scores the raw feature values x (by name; absent = missing) with
// doc: the linear predictor, each nonzero feature's contribution and, for a
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
	pred := &Prediction{Model: doc.Model, Version: doc.Version, Eta: eta, Contributions: contrib}
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
