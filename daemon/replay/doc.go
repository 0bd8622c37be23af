// Package replay runs a recorded stream through exactly the daemon's
// per-model pipeline (pipeline.Pipeline), without NATS: every record is
// decoded by the daemon's decoder (record.Decoder), applied with the
// record's own time as the clock, and followed by the publication check the
// model goroutine makes; the stream ends with a forced publication. Idle
// steps, which the daemon runs on wall-clock ticks, are left out, so a
// replay is deterministic: the same file and settings give the same bits.
//
// It owns the reading of recordings (JSON lines in the wire format, or CSV
// with a header row, a label column and an optional time column), the
// record of what the pipeline did (alerts, published versions, one history
// row per retune, the final regularization path) and the plots drawn from
// it (plot.go).
//
// Concurrency: Run keeps all of its state in the call and returns a Result
// that it no longer touches, so concurrent calls are independent; a Result
// is not safe for concurrent mutation but may be read from many goroutines.
package replay
