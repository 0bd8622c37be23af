package window

import (
	"iter"
	"math"
)

// Timed is a Ring of values stamped with a time (int64, by convention Unix
// milliseconds) that evicts by count and by time span. Values are kept in
// arrival order and evicted only from the oldest end, so each value keeps
// its physical slot (see Slot) while it lives, as in Ring.
//
// Eviction callbacks receive the slot and the value being removed; they run
// before the slot is reused, so a caller that keeps side arrays indexed by
// slot can subtract the value's contribution there. A nil callback is
// allowed. Callbacks must not modify the Timed. Passing a method value or a
// closure that does not escape keeps Push free of allocations.
//
// Stamps carry no special value: a caller whose records may lack a time
// should pass Latest() for them, so they neither move the span forward nor
// get evicted early. Eviction is FIFO by arrival: a late value whose stamp
// is already before the cutoff stays until it reaches the oldest end.
type Timed[T any] struct {
	ring   *Ring[T]
	stamp  []int64 // by physical slot
	span   int64
	latest int64
}

// NewTimed returns an empty Timed holding at most capacity values and, if
// span > 0, only values whose stamp is >= Latest() − span. span <= 0 means
// count-only eviction. It panics if capacity < 1 (a programmer error).
func NewTimed[T any](capacity int, span int64) *Timed[T] {
	if span < 0 {
		span = 0
	}
	return &Timed[T]{
		ring:   NewRing[T](capacity),
		stamp:  make([]int64, capacity),
		span:   span,
		latest: math.MinInt64,
	}
}

// Push appends v with stamp t and returns the slot it occupies. First the
// high-water mark Latest() becomes max(Latest(), t); then, if the span is
// set, values stamped before Latest() − span are evicted from the oldest
// end; then, if the ring is still full, the oldest value is evicted. Each
// evicted value is passed to evicted (if not nil), oldest first.
func (w *Timed[T]) Push(t int64, v T, evicted func(slot int, v T)) (slot int) {
	if t > w.latest {
		w.latest = t
	}
	if w.span > 0 {
		w.EvictOlder(w.cutoff(), evicted)
	}
	if w.ring.Len() == w.ring.Cap() {
		w.pop(evicted)
	}
	w.ring.Push(v)
	slot = w.ring.Slot(w.ring.Len() - 1)
	w.stamp[slot] = t
	return slot
}

// cutoff returns Latest() − span without overflowing.
func (w *Timed[T]) cutoff() int64 {
	if w.latest < math.MinInt64+w.span {
		return math.MinInt64
	}
	return w.latest - w.span
}

// pop evicts the oldest value, reporting it to evicted. The ring must not
// be empty.
func (w *Timed[T]) pop(evicted func(int, T)) {
	s := w.ring.Slot(0)
	v, _ := w.ring.PopOldest()
	if evicted != nil {
		evicted(s, v)
	}
}

// EvictOlder evicts values from the oldest end while their stamp is
// < cutoff, passing each to evicted (if not nil), and returns how many it
// evicted. It works whatever the span, so a caller can apply its own
// cutoff.
func (w *Timed[T]) EvictOlder(cutoff int64, evicted func(slot int, v T)) (n int) {
	for w.ring.Len() > 0 && w.stamp[w.ring.Slot(0)] < cutoff {
		w.pop(evicted)
		n++
	}
	return n
}

// KeepNewest evicts the oldest values until at most n remain, passing each
// to evicted (if not nil), and returns how many it evicted. n <= 0 empties
// the Timed (Latest() is kept).
func (w *Timed[T]) KeepNewest(n int, evicted func(slot int, v T)) (evictedN int) {
	for w.ring.Len() > max(n, 0) {
		w.pop(evicted)
		evictedN++
	}
	return evictedN
}

// Len returns the number of values held.
func (w *Timed[T]) Len() int { return w.ring.Len() }

// Cap returns the capacity given to NewTimed.
func (w *Timed[T]) Cap() int { return w.ring.Cap() }

// Span returns the span given to NewTimed (0 = none).
func (w *Timed[T]) Span() int64 { return w.span }

// Latest returns the largest stamp ever pushed since NewTimed or Reset
// (math.MinInt64 before the first Push).
func (w *Timed[T]) Latest() int64 { return w.latest }

// At returns the value at logical index i (0 = oldest). It panics if i is
// out of range.
func (w *Timed[T]) At(i int) T { return w.ring.At(i) }

// Stamp returns the stamp of the value at logical index i (0 = oldest). It
// panics if i is out of range.
func (w *Timed[T]) Stamp(i int) int64 { return w.stamp[w.ring.Slot(i)] }

// Slot returns the physical slot in [0, Cap) of logical index i; it is
// stable while the value lives. It panics if i is out of range.
func (w *Timed[T]) Slot(i int) int { return w.ring.Slot(i) }

// All iterates the values from oldest to newest with their logical index.
// The Timed must not be modified during the iteration.
func (w *Timed[T]) All() iter.Seq2[int, T] { return w.ring.All() }

// Reset empties the Timed and forgets Latest(), without calling any
// eviction callback.
func (w *Timed[T]) Reset() {
	w.ring.Reset()
	w.latest = math.MinInt64
}
