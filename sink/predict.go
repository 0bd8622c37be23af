package sink

import (
	"encoding/json"
	"fmt"

	"lariat/online"
)

// StorePredictor is the default Predictor: it scores a record with the
// latest published ModelDoc in Store. The body is a record in the wire
// format; only "x" (values by feature name, null = missing) or "v" (values
// in the model's feature order) is used, other fields ("t", "y", "w",
// "key") are ignored. Missing features are imputed with the window mean;
// names the model does not know are ignored.
type StorePredictor struct {
	// Store holds the models.
	Store *Store
}

var _ Predictor = StorePredictor{}

// predictBody is the part of a record StorePredictor reads.
type predictBody struct {
	X map[string]*float64 `json:"x"`
	V []*float64          `json:"v"`
}

// Predict implements Predictor.
func (p StorePredictor) Predict(model string, body []byte) (*Prediction, error) {
	doc, known := p.Store.Model(model)
	switch {
	case !known:
		return nil, fmt.Errorf("%w %q", ErrUnknownModel, model)
	case doc == nil:
		return nil, fmt.Errorf("%w: %q has not published a version yet", ErrNotReady, model)
	}
	x, err := recordValues(doc, body)
	if err != nil {
		return nil, err
	}
	return Predict(doc, x)
}

// recordValues decodes the feature values of body.
func recordValues(doc *ModelDoc, body []byte) (map[string]float64, error) {
	var rec predictBody
	if err := json.Unmarshal(body, &rec); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrBadRecord, err)
	}
	if rec.X != nil && rec.V != nil {
		return nil, fmt.Errorf("%w: give either \"x\" or \"v\", not both", ErrBadRecord)
	}
	x := make(map[string]float64, len(rec.X)+len(rec.V))
	for name, v := range rec.X {
		if v != nil {
			x[name] = *v
		}
	}
	if rec.V != nil {
		if len(rec.V) != len(doc.Features) {
			return nil, fmt.Errorf("%w: \"v\" has %d values, the model has %d features", ErrBadRecord, len(rec.V), len(doc.Features))
		}
		for j, v := range rec.V {
			if v != nil {
				x[doc.Features[j]] = *v
			}
		}
	}
	return x, nil
}

// Predict scores the raw feature values x (by name; absent = missing) with
// doc: the linear predictor, each nonzero feature's contribution and, for a
// logistic model, the probability and its comparison with the threshold.
// It returns an error wrapping ErrBadRecord if the result is not finite.
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
