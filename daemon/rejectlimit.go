package daemon

import "golang.org/x/time/rate"

// Republishing of rejected records on <prefix>.reject.<model> is limited
// per model by a token bucket: a trickle of rejects (below rejectRate a
// second, or a burst of up to rejectBurst) is republished in full, while a
// flood of bad records (a broken producer, an attack) is sampled at
// rejectRate a second, so that lariat under overload does not spend its
// time and the bus's bandwidth echoing garbage. Every reject is still
// counted under its reason (lariat_records_rejected_total); the ones not
// republished are counted in lariat_rejects_not_republished_total. With the
// body cut to record.DefaultMaxBytes, one model republishes at most
// rejectRate × 64 KiB = 6.4 MiB a second after the burst.
const (
	rejectRate  = 100 // republished rejects a second, per model, sustained
	rejectBurst = 200 // republished rejects in a burst, per model
)

// newRejectLimiter returns the token bucket of one model's republished
// rejects: up to burst tokens, refilled at r a second, one per
// republication (golang.org/x/time/rate: safe for concurrent use, as
// rejects come from the subscription goroutine, decoding, and the model
// goroutine, the pipeline's refusals; a time earlier than the last one
// adds nothing).
func newRejectLimiter(r float64, burst int) *rate.Limiter {
	return rate.NewLimiter(rate.Limit(r), burst)
}
