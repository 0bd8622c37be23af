package window

import "iter"

// Ring is a fixed-capacity FIFO of values of type T. Push on a full ring
// evicts the oldest value and returns it. Every operation but Reset is
// O(1), and none allocates after NewRing.
//
// A value keeps its physical slot (see Slot) for as long as it lives in the
// ring, so a caller may keep side arrays of length Cap indexed by slot.
type Ring[T any] struct {
	buf  []T
	head int // physical slot of the oldest value
	n    int // number of live values
}

// NewRing returns an empty ring holding at most capacity values.
// It panics if capacity < 1 (a programmer error).
func NewRing[T any](capacity int) *Ring[T] {
	if capacity < 1 {
		panic("window: ring capacity must be >= 1")
	}
	return &Ring[T]{buf: make([]T, capacity)}
}

// Push appends v as the newest value. If the ring was full, the oldest value
// is evicted and returned with full == true; otherwise evicted is the zero
// value and full is false.
func (r *Ring[T]) Push(v T) (evicted T, full bool) {
	c := len(r.buf)
	if r.n == c {
		evicted = r.buf[r.head]
		r.buf[r.head] = v
		r.head++
		if r.head == c {
			r.head = 0
		}
		return evicted, true
	}
	i := r.head + r.n
	if i >= c {
		i -= c
	}
	r.buf[i] = v
	r.n++
	return evicted, false
}

// PopOldest removes and returns the oldest value; ok is false if the ring
// is empty. The vacated slot is cleared so the ring keeps no reference to it.
func (r *Ring[T]) PopOldest() (v T, ok bool) {
	if r.n == 0 {
		return v, false
	}
	var zero T
	v = r.buf[r.head]
	r.buf[r.head] = zero
	r.head++
	if r.head == len(r.buf) {
		r.head = 0
	}
	r.n--
	return v, true
}

// Len returns the number of values in the ring.
func (r *Ring[T]) Len() int { return r.n }

// Cap returns the capacity given to NewRing.
func (r *Ring[T]) Cap() int { return len(r.buf) }

// Slot returns the physical slot in [0, Cap) of the value at logical index
// i (0 = oldest). The slot of a value does not change while it is in the
// ring. Slot panics if i is out of range.
func (r *Ring[T]) Slot(i int) int {
	if i < 0 || i >= r.n {
		panic("window: ring index out of range")
	}
	s := r.head + i
	if s >= len(r.buf) {
		s -= len(r.buf)
	}
	return s
}

// At returns the value at logical index i: 0 is the oldest, Len()-1 the
// newest. It panics if i is out of range.
func (r *Ring[T]) At(i int) T { return r.buf[r.Slot(i)] }

// Oldest returns the oldest value; ok is false if the ring is empty.
func (r *Ring[T]) Oldest() (v T, ok bool) {
	if r.n == 0 {
		return v, false
	}
	return r.buf[r.head], true
}

// Newest returns the newest value; ok is false if the ring is empty.
func (r *Ring[T]) Newest() (v T, ok bool) {
	if r.n == 0 {
		return v, false
	}
	return r.buf[r.Slot(r.n-1)], true
}

// Reset empties the ring, clearing every slot, and keeps its capacity.
func (r *Ring[T]) Reset() {
	clear(r.buf)
	r.head, r.n = 0, 0
}

// All returns an iterator over the values from oldest to newest, yielding
// the logical index and the value. The ring must not be modified during
// the iteration.
func (r *Ring[T]) All() iter.Seq2[int, T] {
	return func(yield func(int, T) bool) {
		for i := 0; i < r.n; i++ {
			if !yield(i, r.At(i)) {
				return
			}
		}
	}
}
