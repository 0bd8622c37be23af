// Package window holds the bounded recent history of a stream and the
// detectors that watch it: a generic count-bounded ring (Ring), time-span
// eviction on top of it (Timed), a deterministic held-out splitter
// (Splitter), drift detectors on a scalar stream (ADWIN, PageHinkley), the
// maximum-likelihood estimate of where the mean of a sequence rose
// (EstimateRise) and per-feature shift statistics against a reference
// snapshot (ShiftReference).
//
// The package uses only the standard library and does no I/O; time is
// passed in by the caller as Unix milliseconds. Per-record operations
// (Ring.Push, Timed.Push, ADWIN.Add, PageHinkley.Add, Splitter.Holdout) do
// not allocate, nor does EstimateRise.
//
// Every stateful type (ADWIN, PageHinkley, ShiftReference, Ring, Timed)
// saves its whole state, options included, with MarshalBinary (and
// AppendBinary) and restores it with UnmarshalBinary, so a restored value
// continues bit for bit as the saved one would have. The format is
// versioned (StateVersion) and malformed input is refused with errors
// wrapping ErrState; Encoder and Decoder write and read the same format
// for callers that save states of their own. Splitter is configuration
// only and holds no state.
//
// Concurrency: no type in this package is safe for concurrent use; each
// value is owned by one goroutine (the model's), which calls it without
// locks.
package window
