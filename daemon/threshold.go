package daemon

import (
	"errors"
	"fmt"
	"time"

	"lariat/config"
	"lariat/online"
	"lariat/sink"
)

// minTuneNegatives is the fewest held-out negatives the fpr mode tunes on;
// with fewer, the attainable false-positive rates are too coarse (steps of
// 1/negatives) and the previous threshold is kept.
const minTuneNegatives = 50

// handoverTimeout bounds how long SetThresholdTarget waits for the model
// goroutine to take a change.
const handoverTimeout = 5 * time.Second

// tuner keeps a logistic model's alert threshold: fixed (mode "fixed", the
// target is the threshold), or re-tuned at every retune on the held-out
// ring from the chosen member's probabilities, to the smallest threshold
// whose held-out false-positive rate is at most the target (mode "fpr",
// online.ThresholdForFPR) or whose held-out precision is at least the
// target (mode "precision", online.ThresholdForPrecision). Until the first
// tuning, and when a tuning finds no threshold, the previous value stays
// (at start the configured threshold.value). It also publishes the ROC
// table of the chosen member on the held-out ring (Store.SetROC). Its state
// belongs to the model goroutine; SetThresholdTarget hands changes over on
// the worker's control channel.
type tuner struct {
	w      *worker
	mode   string
	target float64
	value  float64

	probs, labels []float64 // scratch

	scoring *scorer // nil without a score_subject
}

var _ observer = (*tuner)(nil)

// newTuner returns the threshold tuner of a logistic model (nil
// otherwise), starting from ov when the model has a persisted override.
func newTuner(w *worker, ov *thresholdOverride) *tuner {
	if !w.cfg.Logistic() {
		return nil
	}
	th := w.cfg.Threshold
	t := &tuner{w: w, mode: th.Mode, target: th.Target, value: th.Value, scoring: newScorer(w)}
	if th.Mode == config.ThresholdFixed {
		t.target = th.Value
	}
	if ov != nil {
		t.set(ov.Mode, ov.Target)
	}
	return t
}

func (t *tuner) observe([]float64, float64, float64, bool) {}

// retuned re-tunes the threshold on the held-out ring.
func (t *tuner) retuned(_ []online.Score, chosen int, _ bool) { t.tune(chosen) }

// annotate puts the current threshold into the document.
func (t *tuner) annotate(doc *sink.ModelDoc) {
	doc.Threshold = &sink.Threshold{Value: t.value, Mode: t.mode, Target: t.target}
}

// set changes the mode and target (model goroutine) and re-tunes at once.
func (t *tuner) set(mode string, target float64) {
	t.mode, t.target = mode, target
	if mode == config.ThresholdFixed {
		t.value = target
		return
	}
	if c := t.w.current(); c >= 0 {
		t.tune(c)
	}
}

// tune sets the threshold from member chosen's held-out probabilities and
// stores the ROC table.
func (t *tuner) tune(chosen int) {
	w := t.w
	if w.hold == nil || w.hold.Len() == 0 || chosen < 0 {
		return
	}
	t.probs = w.ladder.HoldoutPredictions(chosen, w.hold, t.probs)
	t.labels = w.hold.Labels(t.labels)
	w.d.store.SetROC(w.name, online.ROC(t.probs, t.labels, nil))
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

// tunerOf returns w's threshold tuner, or nil.
func tunerOf(w *worker) *tuner {
	for _, o := range w.obs {
		if t, ok := o.(*tuner); ok {
			return t
		}
	}
	return nil
}

var _ sink.ThresholdSetter = (*Daemon)(nil)

// SetThresholdTarget changes a logistic model's alert threshold (PUT
// /v1/models/{name}/threshold): mode "fixed" with the threshold itself as
// target, in (0, 1), or "fpr" / "precision" with the target rate in (0, 1).
// The change is first saved in data_dir/thresholds.json (atomically), so it
// survives a restart, then handed to the model goroutine, which re-tunes at
// once; the model document shows it from the next publication. An unknown
// or non-logistic model gives an error wrapping sink.ErrUnknownModel; a
// change that could not be saved or handed over wraps sink.ErrNotReady.
func (d *Daemon) SetThresholdTarget(model, mode string, target float64) error {
	w, ok := d.byName[model]
	if !ok {
		return fmt.Errorf("%w: %q", sink.ErrUnknownModel, model)
	}
	t := tunerOf(w)
	if t == nil {
		return fmt.Errorf("%w: model %q is not logistic and has no threshold", sink.ErrUnknownModel, model)
	}
	if err := checkThreshold(mode, target); err != nil {
		return err
	}
	thresholdFileMu.Lock()
	defer thresholdFileMu.Unlock()
	if err := saveThresholdOverride(d.cfg.DataDir, model, thresholdOverride{Mode: mode, Target: target, Updated: time.Now().UTC()}); err != nil {
		w.log.Error("threshold change not saved", "err", err)
		return fmt.Errorf("%w: threshold change not saved: %v", sink.ErrNotReady, err)
	}
	timer := time.NewTimer(handoverTimeout)
	defer timer.Stop()
	select {
	case w.ctl <- func() { t.set(mode, target) }:
	case <-w.done:
		// Stopped: the saved change applies at the next start.
	case <-timer.C:
		return fmt.Errorf("%w: model %s did not take the change within %s (saved; it applies at the next start)", sink.ErrNotReady, model, handoverTimeout)
	}
	w.log.Info("threshold target changed", "mode", mode, "target", target)
	return nil
}

// errThreshold reports an invalid threshold mode or target.
var errThreshold = errors.New("daemon: invalid threshold")

// checkThreshold validates a mode and target as config and the HTTP API do.
func checkThreshold(mode string, target float64) error {
	switch mode {
	case config.ThresholdFixed:
		if !(target > 0 && target < 1) {
			return fmt.Errorf("%w: fixed threshold %v must be in (0, 1)", errThreshold, target)
		}
	case config.ThresholdFPR, config.ThresholdPrecision:
		if !(target > 0 && target < 1) {
			return fmt.Errorf("%w: target %v must be in (0, 1)", errThreshold, target)
		}
	default:
		return fmt.Errorf("%w: mode %q (allowed: fixed, fpr, precision)", errThreshold, mode)
	}
	return nil
}
