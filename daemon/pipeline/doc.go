// Package pipeline is one model's whole per-record logic as a single value:
// the λ ladder and its train window, the held-out ring and the rule that
// fills it, the λ chooser with its hysteresis, the drift watch
// (performance, data and model drift, cooldowns, adaptation), the threshold
// tuner of a logistic model, the version counter and the last published
// document. The daemon's model goroutine, `lariat fit` and the tests drive
// the same value: Apply for each decoded record, Idle for spare time,
// Publish (or Document) for the model document.
//
// A Pipeline has no goroutines, does no I/O and reads no clock: time comes
// from the record ("t") or is passed in. It is not safe for concurrent use;
// one goroutine owns it. What it publishes (Snapshot) is immutable and may
// be shared. Scorer, which scores unlabeled records against a published
// Snapshot, is owned by its own goroutine in the same way.
//
// # Policies
//
// The drift watch (watch.go) and the threshold tuner (tuner.go) are plain
// data over narrow interfaces: the watch sees the model through
// watchedWindow (the sizes of the train window and the held-out ring, and
// keep-the-newest-n operations), and receives the chosen member's
// standardized coefficients and λ at each retune; the tuner sees
// heldOutScorer (a member's held-out probabilities and the labels). Neither
// holds a pointer to the Pipeline, so their state can be saved and restored
// as values.
package pipeline
