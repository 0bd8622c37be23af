package online

import (
	"fmt"
	"slices"
)

// Holdout is a fixed-capacity ring of held-out records (copies of X, Y and
// W) on which Ladder.Score measures every ladder member. When full, Add
// evicts the oldest record. A Holdout is not safe for concurrent use, and
// Ladder.Score and Ladder.HoldoutPredictions use its scratch space, so one
// goroutine owns both.
type Holdout struct {
	d    int
	x    []float64 // Cap()·d values, slot-major
	y, w []float64 // per slot; w already maps 0 to 1
	miss []bool    // per slot: the record has a missing value (NaN in x)
	head int       // slot of the oldest record
	n    int
	loss Loss   // non-nil: labels must lie in its domain
	dom  Domain // loss.Domain(), Reals for a nil loss

	// Scratch for Ladder.Score: vals and rank sized to the capacity, coef
	// to the features (one member's raw-unit coefficients).
	vals []float64
	rank []ranked
	coef []float64
}

// NewHoldout returns an empty ring for records of the given number of
// features holding at most capacity records. It panics if features or
// capacity is less than 1.
func NewHoldout(features, capacity int) *Holdout {
	if features < 1 || capacity < 1 {
		panic(fmt.Sprintf("online: NewHoldout(%d, %d): features and capacity must be >= 1", features, capacity))
	}
	return &Holdout{
		d:    features,
		x:    make([]float64, features*capacity),
		y:    make([]float64, capacity),
		w:    make([]float64, capacity),
		miss: make([]bool, capacity),
		vals: make([]float64, capacity),
		rank: make([]ranked, 0, capacity),
		coef: make([]float64, features),
	}
}

// SetLoss makes later Adds reject labels outside loss's Domain with
// ErrLabel, as Ladder.Add does (logistic: 0 or 1). Without it Add accepts
// any finite label; Ladder.Score then skips records whose label lies
// outside the ladder's loss's Domain.
func (h *Holdout) SetLoss(loss Loss) {
	h.loss, h.dom = loss, Reals
	if loss != nil {
		h.dom = loss.Domain()
	}
}

// Add validates r as Ladder.Add does (the label domain only after SetLoss)
// and stores a copy of it, evicting the oldest record when the ring is full.
// A rejected record leaves the ring untouched; the error wraps ErrDimension,
// ErrNotFinite, ErrLabel or ErrWeight. NaN in X marks a missing value, kept
// as NaN (Ladder.Eta then counts it at the feature's mean) and flagged so
// that Ladder.Score takes the slow path only for such records. Add does not
// allocate.
func (h *Holdout) Add(r Record) error {
	if err := checkHeldOut(&r, h.d, h.loss, h.dom); err != nil {
		return err
	}
	capacity := len(h.y)
	slot := h.head + h.n
	if h.n == capacity {
		slot = h.head
		h.head++
	} else {
		h.n++
	}
	if slot >= capacity {
		slot -= capacity
	}
	if h.head == capacity {
		h.head = 0
	}
	copy(h.x[slot*h.d:(slot+1)*h.d], r.X)
	h.miss[slot] = hasNaN(r.X)
	h.y[slot] = r.Y
	w := r.W
	if w == 0 {
		w = 1
	}
	h.w[slot] = w
	return nil
}

// hasNaN reports whether x holds a missing value.
func hasNaN(x []float64) bool {
	for _, v := range x {
		if v != v {
			return true
		}
	}
	return false
}

// checkHeldOut validates r with the checks Ladder.Add uses (checkFeatures,
// checkLabel); loss nil (dom Reals) skips the label-domain check.
func checkHeldOut(r *Record, d int, loss Loss, dom Domain) error {
	if len(r.X) != d {
		return fmt.Errorf("%w: got %d, want %d", ErrDimension, len(r.X), d)
	}
	if err := checkFeatures(r.X); err != nil {
		return err
	}
	return checkLabel(r, loss, dom)
}

// Len returns the number of records held.
func (h *Holdout) Len() int { return h.n }

// Cap returns the capacity given to NewHoldout.
func (h *Holdout) Cap() int { return len(h.y) }

// Features returns the number of features per record.
func (h *Holdout) Features() int { return h.d }

// At returns record i, 0 being the oldest and Len()−1 the newest. x aliases
// the ring's storage: read it before the next Add and do not modify it. w is
// the effective weight (a stored 0 reads as 1). At panics if i is out of
// range.
func (h *Holdout) At(i int) (x []float64, y, w float64) {
	if i < 0 || i >= h.n {
		panic(fmt.Sprintf("online: Holdout.At(%d) with %d records", i, h.n))
	}
	s := h.slot(i)
	return h.x[s*h.d : (s+1)*h.d : (s+1)*h.d], h.y[s], h.w[s]
}

// Labels returns the held-out labels, oldest first, in dst resized to Len().
func (h *Holdout) Labels(dst []float64) []float64 {
	dst = slices.Grow(dst[:0], h.n)[:h.n]
	for k := range dst {
		dst[k] = h.y[h.slot(k)]
	}
	return dst
}

// Weights returns the effective held-out weights (a stored 0 reads as 1),
// oldest first, in dst resized to Len().
func (h *Holdout) Weights(dst []float64) []float64 {
	dst = slices.Grow(dst[:0], h.n)[:h.n]
	for k := range dst {
		dst[k] = h.w[h.slot(k)]
	}
	return dst
}

// slot returns the storage slot of logical record i.
func (h *Holdout) slot(i int) int {
	s := h.head + i
	if s >= len(h.y) {
		s -= len(h.y)
	}
	return s
}

// Reset empties the ring; its capacity and SetLoss setting are kept.
func (h *Holdout) Reset() { h.head, h.n = 0, 0 }

// KeepNewest drops all but the newest n records (all of them when n <= 0),
// as after a confirmed drift; it does nothing when n >= Len(). The kept
// records stay where they are, so KeepNewest costs O(1) and does not
// allocate.
func (h *Holdout) KeepNewest(n int) {
	n = max(n, 0)
	if n >= h.n {
		return
	}
	h.head = h.slot(h.n - n)
	h.n = n
}
