package daemon

import (
	"sync"
	"time"
)

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

// rejectLimiter is a token bucket (common practice, no single source):
// it holds up to burst tokens, refills rate tokens a second, and a
// republication takes one. Safe for concurrent use: rejects come from the
// subscription goroutine (decoding) and the model goroutine (the pipeline's
// refusals).
type rejectLimiter struct {
	mu     sync.Mutex
	rate   float64 // tokens a second
	burst  float64
	tokens float64
	last   time.Time
}

func newRejectLimiter(rate float64, burst int) *rejectLimiter {
	return &rejectLimiter{rate: rate, burst: float64(burst), tokens: float64(burst)}
}

// allow takes a token at now if there is one.
func (l *rejectLimiter) allow(now time.Time) bool {
	l.mu.Lock()
	defer l.mu.Unlock()
	switch {
	case l.last.IsZero():
		l.last = now
	case now.After(l.last): // callers on two goroutines may pass times out of order
		l.tokens = min(l.burst, l.tokens+now.Sub(l.last).Seconds()*l.rate)
		l.last = now
	}
	if l.tokens < 1 {
		return false
	}
	l.tokens--
	return true
}
