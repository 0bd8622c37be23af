package daemon

import (
	"fmt"
	"time"

	"lariat/daemon/pipeline"
	"lariat/sink"
)

// handoverTimeout bounds how long SetThresholdTarget waits for the model
// goroutine to take a change.
const handoverTimeout = 5 * time.Second

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
		return fmt.Errorf("%w: %s", sink.ErrUnknownModel, sink.QuoteInput(model))
	}
	if !w.pipe.Logistic() {
		return fmt.Errorf("%w: model %s is not logistic and has no threshold", sink.ErrUnknownModel, sink.QuoteInput(model))
	}
	if err := pipeline.CheckThreshold(mode, target); err != nil {
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
	case w.ctl <- func() { w.setThreshold(mode, target) }:
	case <-w.done:
		// Stopped: the saved change applies at the next start.
	case <-timer.C:
		return fmt.Errorf("%w: model %s did not take the change within %s (saved; it applies at the next start)", sink.ErrNotReady, model, handoverTimeout)
	}
	w.log.Info("threshold target changed", "mode", mode, "target", target)
	return nil
}

// setThreshold changes the threshold on the model goroutine and stores the
// ROC table it was re-tuned on.
func (w *worker) setThreshold(mode string, target float64) {
	if err := w.pipe.SetThreshold(mode, target); err != nil {
		w.log.Error("threshold change refused", "err", err) // checked before the hand-over
		return
	}
	if roc := w.pipe.ROC(); roc != nil {
		w.d.store.SetROC(w.name, roc)
	}
}
