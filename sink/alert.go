package sink

import (
	"errors"
	"fmt"
	"time"
)

// ErrBadAlert is returned when an alert has no model, an unknown kind or
// severity, or a non-finite number.
var ErrBadAlert = errors.New("sink: invalid alert")

// AlertKind says what an alert is about.
type AlertKind string

// The alert kinds.
const (
	// KindPerformance: the held-out or test-then-train loss changed (ADWIN,
	// Page-Hinkley).
	KindPerformance AlertKind = "performance"
	// KindData: a feature's distribution shifted (mean shift, PSI).
	KindData AlertKind = "data"
	// KindModel: the model's support or chosen λ moved.
	KindModel AlertKind = "model"
	// KindPrediction: a scored record's probability crossed the threshold.
	KindPrediction AlertKind = "prediction"
)

// Severity ranks an alert.
type Severity string

// The severities.
const (
	// SeverityInfo is informational.
	SeverityInfo Severity = "info"
	// SeverityWarning needs attention.
	SeverityWarning Severity = "warning"
	// SeverityCritical needs action.
	SeverityCritical Severity = "critical"
)

// alertKinds lists the kinds in a fixed order (metrics children index).
var alertKinds = [...]AlertKind{KindPerformance, KindData, KindModel, KindPrediction}

// kindIndex returns k's position in alertKinds, or -1.
func kindIndex(k AlertKind) int {
	for i, v := range alertKinds {
		if v == k {
			return i
		}
	}
	return -1
}

// AlertWindows gives the sizes of the windows an alert was computed on.
type AlertWindows struct {
	// Train is the number of records in the train window.
	Train int `json:"train"`
	// Holdout is the number of records in the held-out ring.
	Holdout int `json:"holdout"`
	// Detector is the detector's window (ADWIN width, Page-Hinkley count,
	// records compared for data shift).
	Detector int `json:"detector"`
}

// Alert is one alert message, published on <prefix>.alert.<model> and kept
// in the Store's recent-alerts ring.
type Alert struct {
	// Model is the model's name.
	Model string `json:"model"`
	// Kind is performance, data, model or prediction.
	Kind AlertKind `json:"kind"`
	// Severity is info, warning or critical.
	Severity Severity `json:"severity"`
	// Statistic is the detector's statistic (loss change, PSI, mean shift,
	// ladder steps, probability).
	Statistic float64 `json:"statistic"`
	// Threshold is the value Statistic was compared against.
	Threshold float64 `json:"threshold"`
	// Windows gives the window sizes involved.
	Windows AlertWindows `json:"windows"`
	// Features names the features involved, if any.
	Features []string `json:"features,omitempty"`
	// Time is the triggering record's time (RFC 3339); omitted if the
	// record had none.
	Time time.Time `json:"time,omitzero"`
	// Seq is the triggering record's sequence number.
	Seq uint64 `json:"seq"`
	// Message is a one-line human-readable description.
	Message string `json:"message"`
	// Probability is the predicted probability (prediction alerts).
	Probability *float64 `json:"probability,omitempty"`
	// Contributions maps each nonzero feature to coef·x (prediction
	// alerts).
	Contributions map[string]float64 `json:"contributions,omitempty"`
}

// Validate returns an error wrapping ErrBadAlert if a has no model, an
// unknown kind or severity, or a non-finite statistic, threshold,
// probability or contribution (JSON cannot carry them).
func (a *Alert) Validate() error {
	switch {
	case a.Model == "":
		return fmt.Errorf("%w: no model", ErrBadAlert)
	case kindIndex(a.Kind) < 0:
		return fmt.Errorf("%w: kind %q (allowed: performance, data, model, prediction)", ErrBadAlert, a.Kind)
	case a.Severity != SeverityInfo && a.Severity != SeverityWarning && a.Severity != SeverityCritical:
		return fmt.Errorf("%w: severity %q (allowed: info, warning, critical)", ErrBadAlert, a.Severity)
	case !finite(a.Statistic) || !finite(a.Threshold):
		return fmt.Errorf("%w: non-finite statistic %v or threshold %v", ErrBadAlert, a.Statistic, a.Threshold)
	case a.Probability != nil && !finite(*a.Probability):
		return fmt.Errorf("%w: non-finite probability", ErrBadAlert)
	}
	for name, c := range a.Contributions {
		if !finite(c) {
			return fmt.Errorf("%w: non-finite contribution of %s", ErrBadAlert, name)
		}
	}
	return nil
}
