package pipeline

import (
	"errors"
	"fmt"

	"lariat/config"
	"lariat/online"
	"lariat/sink"
)

// minTuneNegatives is the fewest held-out negatives the fpr mode tunes on;
// with fewer, the attainable false-positive rates are too coarse (steps of
// 1/negatives) and the previous threshold is kept.
const minTuneNegatives = 50

// heldOutScorer is what threshold tuning needs from the model: the
// probabilities a ladder member gives the held-out records and their
// labels. The Pipeline implements it over its ladder and held-out ring.
type heldOutScorer interface {
	// HeldOutScores appends member's held-out probabilities to probs[:0] and
	// the held-out labels to labels[:0]; both are empty without a held-out
	// ring.
	HeldOutScores(member int, probs, labels []float64) ([]float64, []float64)
}

// tuner keeps a logistic model's alert threshold: fixed (mode "fixed", the
// target is the threshold), or re-tuned at every retune on the held-out
// ring from the chosen member's probabilities, to the smallest threshold
// whose held-out false-positive rate is at most the target (mode "fpr",
// online.ThresholdForFPR) or whose held-out precision is at least the
// target (mode "precision", online.ThresholdForPrecision). Until the first
// tuning, and when a tuning finds no threshold, the previous value stays
// (at start the configured threshold.value). Each tuning also leaves the
// ROC table of the chosen member on the held-out ring in roc. Its state is
// plain data.
type tuner struct {
	mode   string
	target float64
	value  float64

	roc []online.ROCPoint // the last tuning's ROC table; nil before

	probs, labels []float64 // scratch
}

// newTuner returns the threshold tuner of a logistic model (nil otherwise),
// starting from ov when the model has a saved override.
func newTuner(m *config.Model, ov *Threshold) *tuner {
	if !m.Logistic() {
		return nil
	}
	th := m.Threshold
	t := &tuner{mode: th.Mode, target: th.Target, value: th.Value}
	if th.Mode == config.ThresholdFixed {
		t.target = th.Value
	}
	if ov != nil {
		t.mode, t.target = ov.Mode, ov.Target
		if ov.Mode == config.ThresholdFixed {
			t.value = ov.Target
		}
	}
	return t
}

// set changes the mode and target and re-tunes at once on member chosen
// (< 0: not yet chosen).
func (t *tuner) set(mode string, target float64, src heldOutScorer, chosen int) {
	t.mode, t.target = mode, target
	if mode == config.ThresholdFixed {
		t.value = target
		return
	}
	t.tune(src, chosen)
}

// tune sets the threshold from member chosen's held-out probabilities and
// keeps the ROC table.
func (t *tuner) tune(src heldOutScorer, chosen int) {
	if chosen < 0 {
		return
	}
	t.probs, t.labels = src.HeldOutScores(chosen, t.probs, t.labels)
	if len(t.labels) == 0 {
		return
	}
	t.roc = online.ROC(t.probs, t.labels, nil)
	var v float64
	ok := false
	switch t.mode {
	case config.ThresholdFPR:
		if negatives(t.labels) >= minTuneNegatives {
			v, ok = online.ThresholdForFPR(t.probs, t.labels, t.target)
		}
	case config.ThresholdPrecision:
		v, ok = online.ThresholdForPrecision(t.probs, t.labels, t.target)
	default:
		t.value = t.target
		return
	}
	if ok {
		t.value = v
	}
}

// threshold returns the current threshold for a model document.
func (t *tuner) threshold() *sink.Threshold {
	return &sink.Threshold{Value: t.value, Mode: t.mode, Target: t.target}
}

// negatives counts the labels equal to 0.
func negatives(labels []float64) int {
	n := 0
	for _, y := range labels {
		if y == 0 {
			n++
		}
	}
	return n
}

// Threshold is a threshold mode and target, as set at runtime (HTTP) and
// saved across restarts.
type Threshold struct {
	// Mode is "fixed", "fpr" or "precision".
	Mode string
	// Target is the threshold itself (fixed) or the target rate.
	Target float64
}

// ErrThreshold reports an invalid threshold mode or target.
var ErrThreshold = errors.New("pipeline: invalid threshold")

// CheckThreshold validates a mode and target as the configuration and the
// HTTP API do; the error wraps ErrThreshold.
func CheckThreshold(mode string, target float64) error {
	switch mode {
	case config.ThresholdFixed:
		if !(target > 0 && target < 1) {
			return fmt.Errorf("%w: fixed threshold %v must be in (0, 1)", ErrThreshold, target)
		}
	case config.ThresholdFPR, config.ThresholdPrecision:
		if !(target > 0 && target < 1) {
			return fmt.Errorf("%w: target %v must be in (0, 1)", ErrThreshold, target)
		}
	default:
		return fmt.Errorf("%w: mode %q (allowed: fixed, fpr, precision)", ErrThreshold, mode)
	}
	return nil
}
