package daemon

import (
	"lariat/online"
	"lariat/sink"
)

// observer watches one model from inside its goroutine; it is the hook for
// the drift watch, threshold tuning and scoring (files watch*.go,
// threshold*.go, scoring.go).
// Every method runs on the model goroutine, so an observer may keep state
// without locks but must not block: alerts go out through d.pub (publish is
// buffered by nats.go) and d.store.AddAlert.
//
// DEVELOPERS: to add a watch, implement observer in a watch*.go file and
// return it from observersFor below (the only line to change here).
type observer interface {
	// observe is called after each applied record with its features (the
	// model's feature order, NaN = missing; valid only during the call), its
	// label, the test-then-train loss of the current model on it (computed
	// before the ladder learned from it) and whether it was held out.
	observe(x []float64, y, loss float64, heldOut bool)
	// retuned is called after each retune with the ladder's held-out
	// scores (valid only during the call), the chosen index and whether
	// the choice moved.
	retuned(scores []online.Score, chosen int, changed bool)
	// annotate may amend a document before it is compared and published,
	// e.g. with a tuned threshold (doc.Threshold).
	annotate(doc *sink.ModelDoc)
}

// observersFor returns the observers of a model, built when the daemon is
// built: the drift watch (watch.go) and, for a logistic model, the
// threshold tuner (threshold.go), which also owns the scorer of the
// model's score_subject (scoring.go).
func (d *Daemon) observersFor(w *worker) []observer {
	obs := []observer{newWatch(w)}
	if t := newTuner(w, thresholdOverrideFor(w)); t != nil {
		obs = append(obs, t)
	}
	return obs
}
