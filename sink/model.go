package sink

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"time"

	"lariat/online"
)

// ErrNotFinite is returned by NewModelDoc when a coefficient, the intercept,
// a scale value, λ or the threshold is NaN or infinite; such a model is never
// published.
var ErrNotFinite = errors.New("sink: non-finite value in model")

// ErrFeatureNames is returned by NewModelDoc when a feature name is empty or
// repeated.
var ErrFeatureNames = errors.New("sink: feature names must be non-empty and unique")

// ModelDoc is the published form of one model version: the JSON document on
// the bus (<prefix>.model.<name>), in the key-value bucket and on
// GET /v1/models/{name}. Maps are encoded with sorted keys, so the same
// document always encodes to the same bytes.
type ModelDoc struct {
	// Model is the model's configured name.
	Model string `json:"model"`
	// Version increases by one with every published change.
	Version uint64 `json:"version"`
	// Loss is "squared" or "logistic".
	Loss string `json:"loss"`
	// Penalty is the elastic-net family and the chosen λ.
	Penalty PenaltySpec `json:"penalty"`
	// LambdaIndex is the chosen member's index on the λ ladder (0 = λ_max).
	LambdaIndex int `json:"lambda_index"`
	// Intercept is the intercept in raw units.
	Intercept float64 `json:"intercept"`
	// Coefficients holds the nonzero coefficients in raw units by feature.
	Coefficients map[string]float64 `json:"coefficients"`
	// Standardized holds the nonzero coefficients θ on the standardized
	// scale by feature.
	Standardized map[string]float64 `json:"standardized"`
	// Features lists every feature in the model's order, including those
	// whose coefficient is zero.
	Features []string `json:"features"`
	// Scale holds the train window's mean and population standard
	// deviation of every feature.
	Scale map[string]Scale `json:"scale"`
	// Holdout holds the held-out metrics of the chosen member.
	Holdout HoldoutMetrics `json:"holdout"`
	// Ladder holds the held-out score of every ladder member, largest λ
	// first; it is empty before the first retune.
	Ladder []LadderEntry `json:"ladder"`
	// Grid says how the ladder's λ grid is placed; nil when not given.
	Grid *GridSpec `json:"grid,omitempty"`
	// Records counts the records behind this version.
	Records RecordCounts `json:"records"`
	// Threshold is the alert threshold of a logistic model; nil otherwise.
	Threshold *Threshold `json:"threshold,omitempty"`
	// KKT is the largest violation of the optimality (KKT) conditions of
	// the model on its train window, on the standardized scale: the model
	// is the window's exact optimum when it is at most KKTTolerance. Nil
	// when not measured (the decay learner has no window).
	KKT *float64 `json:"kkt,omitempty"`
	// KKTTolerance is the tolerance the model was fitted to; 0 with KKT nil.
	KKTTolerance float64 `json:"kkt_tolerance,omitempty"`
	// Updated is the publication time (UTC, RFC 3339).
	Updated time.Time `json:"updated"`
}

// Exact reports whether the document carries a KKT residual within its
// tolerance: the model is the exact optimum on its window.
func (d *ModelDoc) Exact() bool { return d.KKT != nil && *d.KKT <= d.KKTTolerance }

// PenaltySpec describes the penalty λ(α‖θ‖₁ + (1−α)/2‖θ‖²).
type PenaltySpec struct {
	// Kind is "lasso", "ridge" or "elastic-net".
	Kind string `json:"kind"`
	// Mix is α.
	Mix float64 `json:"mix"`
	// Lambda is the chosen λ.
	Lambda float64 `json:"lambda"`
}

// Scale is one feature's standardization.
type Scale struct {
	// Mean is the window mean.
	Mean float64 `json:"mean"`
	// Std is the window's population standard deviation (0 for a constant
	// feature, whose coefficient is then 0).
	Std float64 `json:"std"`
}

// HoldoutMetrics are the held-out metrics of one ladder member. The
// loss-specific fields are omitted when zero, which they always are for the
// other loss.
type HoldoutMetrics struct {
	// Loss is the weighted mean held-out loss.
	Loss Metric `json:"loss"`
	// SE is the standard error of Loss.
	SE Metric `json:"se"`
	// AUC is the area under the ROC curve (logistic).
	AUC Metric `json:"auc,omitempty"`
	// Brier is the Brier score (logistic).
	Brier Metric `json:"brier,omitempty"`
	// LogLoss is the mean log loss (logistic).
	LogLoss Metric `json:"log_loss,omitempty"`
	// RMSE is the root mean squared error (squared).
	RMSE Metric `json:"rmse,omitempty"`
	// MAE is the mean absolute error (squared).
	MAE Metric `json:"mae,omitempty"`
	// R2 is the coefficient of determination (squared).
	R2 Metric `json:"r2,omitempty"`
	// Records is the number of held-out records scored.
	Records int `json:"records"`
}

// LadderEntry is the held-out score of one ladder member. The loss-specific
// fields are omitted when zero.
type LadderEntry struct {
	// Index is the member's ladder index (0 = λ_max).
	Index int `json:"index"`
	// Lambda is the member's λ.
	Lambda Metric `json:"lambda"`
	// Loss is the weighted mean held-out loss.
	Loss Metric `json:"loss"`
	// SE is the standard error of Loss.
	SE Metric `json:"se"`
	// Nonzero is the member's number of nonzero coefficients.
	Nonzero int `json:"nonzero"`
	// AUC is the area under the ROC curve (logistic).
	AUC Metric `json:"auc,omitempty"`
	// Brier is the Brier score (logistic).
	Brier Metric `json:"brier,omitempty"`
	// LogLoss is the mean log loss (logistic).
	LogLoss Metric `json:"log_loss,omitempty"`
	// RMSE is the root mean squared error (squared).
	RMSE Metric `json:"rmse,omitempty"`
	// MAE is the mean absolute error (squared).
	MAE Metric `json:"mae,omitempty"`
	// R2 is the coefficient of determination (squared).
	R2 Metric `json:"r2,omitempty"`
}

// GridSpec says how a ladder's λ grid is placed (online.Grid): where it
// is anchored and how far it was extended below its anchored bottom.
type GridSpec struct {
	// Anchor is "lambda_max" (member 0 is λ_max, the smallest λ with every
	// coefficient zero, and the grid spans down to floor·λ_max), "df"
	// (ridge: the grid spans the λ at which the effective degrees of
	// freedom Σ_j e_j/(e_j + λ), e_j the eigenvalues of the window's
	// standardized Gram matrix, are DF[0] and DF[1]) or "fixed" (one λ).
	Anchor string `json:"anchor"`
	// Top and Bottom are the λ of the first and the last member of the
	// anchored grid, before any extension.
	Top Metric `json:"top"`
	// Bottom: see Top.
	Bottom Metric `json:"bottom"`
	// DF holds the degrees of freedom at Top and Bottom (anchor "df").
	DF []float64 `json:"df,omitempty"`
	// Rank is the number of nonzero eigenvalues behind DF; 0 when the
	// grid assumed uncorrelated features (no window, or none yet).
	Rank int `json:"rank,omitempty"`
	// Extended is the number of grid steps the members sit below the
	// anchored grid, because the held-out minimum was at its smallest λ.
	Extended int `json:"extended"`
	// MaxExtended bounds Extended (at most six decades below Bottom; 0 for
	// an L1 penalty while the window holds no more records than features).
	MaxExtended int `json:"max_extended"`
}

// NewGridSpec converts a ladder's grid description.
func NewGridSpec(g online.Grid) *GridSpec {
	s := &GridSpec{Anchor: g.Anchor, Top: Metric(g.Top), Bottom: Metric(g.Bottom), Rank: g.Rank,
		Extended: g.Extended, MaxExtended: g.MaxExtended}
	if g.Anchor == online.AnchorDF {
		s.DF = []float64{g.DF[0], g.DF[1]}
	}
	return s
}

// RecordCounts counts the records behind a model version.
type RecordCounts struct {
	// Window is the number of records in the train window.
	Window int `json:"window"`
	// Holdout is the number of records in the held-out ring.
	Holdout int `json:"holdout"`
	// Seen is the number of records ever accepted for training.
	Seen uint64 `json:"seen"`
	// Applied is the number of records ever applied: for training and
	// held out (a durable model applies each record of its stream exactly
	// once, across restarts).
	Applied uint64 `json:"applied"`
	// Rejected is the number of records rejected so far.
	Rejected uint64 `json:"rejected"`
}

// Threshold is the operating threshold of a logistic model: a record whose
// predicted probability is at least Value raises a prediction alert.
type Threshold struct {
	// Value is the probability threshold in (0, 1).
	Value float64 `json:"value"`
	// Mode is "fixed", "fpr" (Value chosen for a target false-positive
	// rate) or "precision" (Value chosen for a target precision).
	Mode string `json:"mode"`
	// Target is the target rate of modes fpr and precision.
	Target float64 `json:"target"`
}

// Metric is a float64 whose JSON form is null when it is NaN or infinite
// (a held-out metric can be undefined, for example the AUC of a one-class
// held-out ring); null decodes to NaN.
type Metric float64

// MarshalJSON encodes m like encoding/json encodes a float64, or null.
func (m Metric) MarshalJSON() ([]byte, error) {
	f := float64(m)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return appendFloat(make([]byte, 0, 24), f), nil
}

// UnmarshalJSON decodes a number, or null as NaN.
func (m *Metric) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*m = Metric(math.NaN())
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("sink: metric %s: %w", b, err)
	}
	*m = Metric(f)
	return nil
}

// appendFloat formats f as encoding/json does (strconv shortest form, 'e'
// below 1e-6 and from 1e21, exponent without a leading zero).
func appendFloat(b []byte, f float64) []byte {
	format := byte('f')
	if a := math.Abs(f); a != 0 && (a < 1e-6 || a >= 1e21) {
		format = 'e'
	}
	b = strconv.AppendFloat(b, f, format, -1, 64)
	if format == 'e' {
		n := len(b)
		if n >= 4 && b[n-4] == 'e' && b[n-3] == '-' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
	}
	return b
}

// DocInput is what NewModelDoc needs to describe one model version.
type DocInput struct {
	// Name is the model's name.
	Name string
	// Version is the version number; the caller keeps it monotone.
	Version uint64
	// Features names the features in model order; its length must equal
	// len(Model.Coef) (NewModelDoc panics otherwise).
	Features []string
	// Model is the chosen ladder member; required.
	Model *online.Model
	// Grid is the ladder's grid; nil leaves it out of the document.
	Grid *online.Grid
	// Scores are the latest ladder scores; nil before the first retune.
	// The holdout metrics are those of the score whose Index equals
	// Model.Index.
	Scores []online.Score
	// Holdout is the number of records in the held-out ring.
	Holdout int
	// Applied is the number of records ever applied (train and held out).
	Applied uint64
	// Rejected is the number of records rejected so far.
	Rejected uint64
	// Threshold is the logistic model's threshold; ignored for squared.
	Threshold *Threshold
	// Updated is the publication time; stored in UTC.
	Updated time.Time
	// KKT is the model's KKT residual on its window and KKTTol the
	// tolerance it was fitted to; both are left out of the document when
	// KKTTol is 0 or KKT is NaN or infinite (not measured).
	KKT, KKTTol float64
}

// NewModelDoc builds the document of one model version. It returns an error
// wrapping ErrNotFinite if any coefficient, the intercept, a scale value, λ
// or the threshold is NaN or infinite, and ErrFeatureNames for empty or
// repeated names. It panics if in or in.Model is nil or the lengths of
// Features, Coef, Standardized, Mean and Std differ (programmer errors).
func NewModelDoc(in *DocInput) (*ModelDoc, error) {
	m := in.Model
	d := len(in.Features)
	if len(m.Coef) != d || len(m.Standardized) != d || len(m.Mean) != d || len(m.Std) != d {
		panic(fmt.Sprintf("sink: %d feature names for a model of %d coefficients", d, len(m.Coef)))
	}
	if err := checkModel(in); err != nil {
		return nil, err
	}
	doc := &ModelDoc{
		Model:        in.Name,
		Version:      in.Version,
		Loss:         m.Loss,
		Penalty:      PenaltySpec{Kind: m.Penalty.Kind(), Mix: m.Penalty.Mix, Lambda: m.Lambda},
		LambdaIndex:  m.Index,
		Intercept:    m.Intercept,
		Coefficients: make(map[string]float64),
		Standardized: make(map[string]float64),
		Features:     append([]string(nil), in.Features...),
		Scale:        make(map[string]Scale, d),
		Ladder:       make([]LadderEntry, 0, len(in.Scores)),
		Records:      RecordCounts{Window: m.Records, Holdout: in.Holdout, Seen: m.Seen, Applied: in.Applied, Rejected: in.Rejected},
		Updated:      in.Updated.UTC(),
	}
	for j, name := range in.Features {
		if c := m.Coef[j]; c != 0 {
			doc.Coefficients[name] = c
		}
		if t := m.Standardized[j]; t != 0 {
			doc.Standardized[name] = t
		}
		doc.Scale[name] = Scale{Mean: m.Mean[j], Std: m.Std[j]}
	}
	if in.KKTTol > 0 && finite(in.KKT) {
		kkt := in.KKT
		doc.KKT, doc.KKTTolerance = &kkt, in.KKTTol
	}
	logistic := doc.Logistic()
	for _, s := range in.Scores {
		doc.Ladder = append(doc.Ladder, ladderEntry(s, logistic))
		if s.Index == m.Index {
			doc.Holdout = holdoutMetrics(s, logistic, in.Holdout)
		}
	}
	if in.Grid != nil {
		doc.Grid = NewGridSpec(*in.Grid)
	}
	if logistic && in.Threshold != nil {
		t := *in.Threshold
		doc.Threshold = &t
	}
	return doc, nil
}

// checkModel validates names and finiteness of everything NewModelDoc
// copies into a float64 field.
func checkModel(in *DocInput) error {
	seen := make(map[string]bool, len(in.Features))
	for _, name := range in.Features {
		if name == "" || seen[name] {
			return fmt.Errorf("%w: %s", ErrFeatureNames, QuoteInput(name))
		}
		seen[name] = true
	}
	m := in.Model
	bad := func(what string, v float64) error {
		return fmt.Errorf("%w: model %s %s = %v", ErrNotFinite, in.Name, what, v)
	}
	for _, v := range []struct {
		what string
		x    float64
	}{{"intercept", m.Intercept}, {"lambda", m.Lambda}, {"mix", m.Penalty.Mix}} {
		if !finite(v.x) {
			return bad(v.what, v.x)
		}
	}
	for j, name := range in.Features {
		for _, v := range [...]float64{m.Coef[j], m.Standardized[j], m.Mean[j], m.Std[j]} {
			if !finite(v) {
				return bad("feature "+name, v)
			}
		}
	}
	if t := in.Threshold; t != nil && (!finite(t.Value) || !finite(t.Target)) {
		return bad("threshold", t.Value)
	}
	return nil
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// ladderEntry converts one score, keeping only the metrics of its loss.
func ladderEntry(s online.Score, logistic bool) LadderEntry {
	e := LadderEntry{Index: s.Index, Lambda: Metric(s.Lambda), Loss: Metric(s.Loss), SE: Metric(s.SE), Nonzero: s.Nonzero}
	if logistic {
		e.AUC, e.Brier, e.LogLoss = Metric(s.AUC), Metric(s.Brier), Metric(s.LogLoss)
	} else {
		e.RMSE, e.MAE, e.R2 = Metric(s.RMSE), Metric(s.MAE), Metric(s.R2)
	}
	return e
}

// holdoutMetrics converts the chosen member's score.
func holdoutMetrics(s online.Score, logistic bool, records int) HoldoutMetrics {
	h := HoldoutMetrics{Loss: Metric(s.Loss), SE: Metric(s.SE), Records: records}
	if logistic {
		h.AUC, h.Brier, h.LogLoss = Metric(s.AUC), Metric(s.Brier), Metric(s.LogLoss)
	} else {
		h.RMSE, h.MAE, h.R2 = Metric(s.RMSE), Metric(s.MAE), Metric(s.R2)
	}
	return h
}

// Logistic reports whether d is a logistic model.
func (d *ModelDoc) Logistic() bool { return d.Loss == "logistic" }

// Nonzero returns the number of nonzero raw coefficients (the support size).
func (d *ModelDoc) Nonzero() int { return len(d.Coefficients) }

// Eta returns the linear predictor intercept + Σ coef·x of the raw record x
// and each nonzero feature's contribution coef·x. A feature absent from x is
// imputed with its window mean (which contributes nothing on the
// standardized scale); names in x that the model does not use are ignored.
// Terms are summed in the model's feature order, so the result is
// deterministic.
func (d *ModelDoc) Eta(x map[string]float64) (eta float64, contributions map[string]float64) {
	eta = d.Intercept
	contributions = make(map[string]float64, len(d.Coefficients))
	for _, name := range d.Features {
		c, ok := d.Coefficients[name]
		if !ok {
			continue
		}
		v, ok := x[name]
		if !ok || math.IsNaN(v) {
			v = d.Scale[name].Mean
		}
		contributions[name] = c * v
		eta += c * v
	}
	return eta, contributions
}

// Changed reports whether next differs enough from prev to be published
// before the heartbeat: prev is nil; the loss, penalty kind, mix, λ or ladder
// index differ; the threshold differs; the support (the set of features with
// a nonzero raw coefficient) differs; or the intercept or any standardized
// coefficient moved by more than tol·max(1, |a|, |b|) — an absolute
// tolerance for values below 1 and a relative one above. Standardized
// coefficients are compared because they share one scale across features;
// moves of the raw coefficients caused only by a drifting feature scale are
// not a change. Record counts, metrics and times are ignored.
func Changed(prev, next *ModelDoc, tol float64) bool {
	if prev == nil || next == nil {
		return prev != next
	}
	if prev.Loss != next.Loss || prev.Penalty != next.Penalty || prev.LambdaIndex != next.LambdaIndex {
		return true
	}
	if (prev.Threshold == nil) != (next.Threshold == nil) ||
		(prev.Threshold != nil && *prev.Threshold != *next.Threshold) {
		return true
	}
	if len(prev.Coefficients) != len(next.Coefficients) {
		return true
	}
	for name := range prev.Coefficients {
		if _, ok := next.Coefficients[name]; !ok {
			return true
		}
	}
	if moved(prev.Intercept, next.Intercept, tol) {
		return true
	}
	for name, a := range prev.Standardized {
		if moved(a, next.Standardized[name], tol) {
			return true
		}
	}
	for name, b := range next.Standardized {
		if _, ok := prev.Standardized[name]; !ok && moved(0, b, tol) {
			return true
		}
	}
	return false
}

// moved reports |a − b| > tol·max(1, |a|, |b|).
func moved(a, b, tol float64) bool {
	return math.Abs(a-b) > tol*max(1, math.Abs(a), math.Abs(b))
}
