// Package window holds the bounded recent history of a stream and the
// detectors that watch it: a generic count-bounded ring (Ring), time-span
// eviction on top of it (Timed), a deterministic held-out splitter
// (Splitter), drift detectors on a scalar stream (ADWIN, PageHinkley) and
// per-feature shift statistics against a reference snapshot
// (ShiftReference).
//
// The package uses only the standard library and does no I/O; time is
// passed in by the caller as Unix milliseconds. Per-record operations
// (Ring.Push, Timed.Push, ADWIN.Add, PageHinkley.Add, Splitter.Holdout) do
// not allocate.
//
// Concurrency: no type in this package is safe for concurrent use; each
// value is owned by one goroutine (the model's), which calls it without
// locks.
package window
