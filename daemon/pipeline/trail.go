package pipeline

import (
	"fmt"
	"math"

	"lariat/config"
	"lariat/window"
)

// trailMax bounds the loss trail: 1<<17 records (about 1.2 MB with the
// held-out marks). A change older than that many records is not located
// (see watch); windows that span more records are rare and their detection
// delays are far shorter.
const trailMax = 1 << 17

// lossTrail is the drift watch's record of the bounded test-then-train
// loss of the newest records the model holds, each marked held out or
// not, so that after a performance alert the change point is estimated on
// the loss sequence (window.EstimateRise) and mapped exactly onto train
// and held-out records. It does not allocate after newLossTrail.
type lossTrail struct {
	ring *window.Ring[float64]
	held []bool // by ring slot: the record went to the held-out ring
}

// trailCap returns the records the trail keeps for model m: as many as the
// train window and the held-out ring span together, W·k/(k−1) and H·k for
// a holdout of every k-th record (W without one), at most trailMax.
func trailCap(m *config.Model, k int) int {
	c := m.Window.Records
	if k >= 2 {
		c = max((c*k+k-2)/(k-1), m.Holdout.Records*k)
	}
	return min(max(c, 1), trailMax)
}

func newLossTrail(capacity int) *lossTrail {
	return &lossTrail{ring: window.NewRing[float64](capacity), held: make([]bool, capacity)}
}

// push appends one record's bounded loss u.
func (t *lossTrail) push(u float64, heldOut bool) {
	t.ring.Push(u)
	t.held[t.ring.Slot(t.ring.Len()-1)] = heldOut
}

// split counts the train and held-out records among the newest n.
func (t *lossTrail) split(n int) (train, held int) {
	l := t.ring.Len()
	for i := max(l-n, 0); i < l; i++ {
		if t.held[t.ring.Slot(i)] {
			held++
		} else {
			train++
		}
	}
	return train, held
}

// keepNewest drops all but the newest n records.
func (t *lossTrail) keepNewest(n int) {
	for t.ring.Len() > max(n, 0) {
		t.ring.PopOldest()
	}
}

// encode writes the trail: its capacity, the ring (capacity, head, values
// as exact bits), then the marks of its records oldest first.
func (t *lossTrail) encode(e enc) {
	e.int(t.ring.Cap())
	t.ring.EncodeState(e.Encoder, func(e *window.Encoder, v float64) { e.PutFloat64(v) })
	marks := make([]bool, t.ring.Len())
	for i := range marks {
		marks[i] = t.held[t.ring.Slot(i)]
	}
	e.bools(marks)
}

// decode reads what encode wrote into a trail of the same capacity; the
// capacity is checked before the ring's buffer is allocated.
func (t *lossTrail) decode(d dec) error {
	if c := d.int(); !d.failed() && c != t.ring.Cap() {
		d.fail("loss trail of capacity %d, the model's holds %d", c, t.ring.Cap())
	}
	if d.failed() {
		return d.err()
	}
	var r window.Ring[float64]
	if err := r.DecodeState(d.Decoder, func(d *window.Decoder) float64 { return d.Float64() }); err != nil {
		return fmt.Errorf("%w: loss trail: %v", ErrState, err)
	}
	marks := d.bools()
	if d.failed() {
		return d.err()
	}
	if r.Cap() != t.ring.Cap() || len(marks) != r.Len() {
		return fmt.Errorf("%w: loss trail of %d records (%d marks) and capacity %d, the model's holds %d",
			ErrState, r.Len(), len(marks), r.Cap(), t.ring.Cap())
	}
	for i := range r.Len() {
		if v := r.At(i); !(v >= 0 && v <= 1) && !math.IsNaN(v) {
			return fmt.Errorf("%w: loss trail value %g outside [0, 1]", ErrState, v)
		}
	}
	*t.ring = r
	clear(t.held)
	for i, h := range marks {
		t.held[r.Slot(i)] = h
	}
	return nil
}
