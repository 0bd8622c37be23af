package online

import (
	"encoding"
	"errors"
	"fmt"
	"math"

	"lariat/window"
)

// ErrState reports a saved state that cannot be restored: truncated,
// followed by extra bytes, of an unknown format version or type, or
// inconsistent (sizes that do not match, values out of range). The
// restoring call changes nothing when it returns an error wrapping it.
var ErrState = errors.New("online: bad state")

// stateVersion is the first byte of every encoding made by MarshalBinary
// in this package; the second byte names the type (stateLadder, ...).
// Version 4 is written with window.Encoder, every float64 slice with its
// length. It added a ladder's maximum width and its fresh columns (a
// ladder that grows, width.go), its Unpenalized option and the placement
// of its grid (grid.go). Version 5 added the gram learner's solve on read
// (whether the due solve is the record path's, and a stale flag per
// member); it is the version written. Version 4 is still read: its
// layouts differ only there, and a gram learner of version 4 has every
// member solved at its last solve, as that version kept them. Versions 1
// to 3 are no longer read. A change to the saved fields or their order
// takes a new version.
const stateVersion = 5

// stateOldest is the oldest version read.
const stateOldest = 4

// Type bytes of the encodings.
const (
	stateLadder  = 'L'
	stateHoldout = 'H'
	stateChooser = 'C'
)

// Bounds on the sizes a saved state may claim. They keep a hostile or
// corrupt encoding from making the restore allocate without limit: the
// window capacity and the holdout capacity at most maxStateCap records,
// at most maxStateFeatures features and maxStateSize members, and at most
// maxStateSteps steps per record, so that a restored ladder cannot stall
// its caller. The buffers a restore allocates are bounded by
// stateWordLimit.
const (
	maxStateCap      = 100_000_000
	maxStateFeatures = 1 << 20
	maxStateSize     = 1 << 12
	maxStateSteps    = 1 << 20
	maxStateInt      = math.MaxInt
)

// stateWordLimit bounds the 8-byte words of the buffers that a restore
// allocates for the capacity, features and members an encoding claims:
// 2^29 words, 4 GiB. A window of 10^7 records of 40 features with 12
// members fits; a larger ladder cannot be restored (a known limitation).
// It is a variable so that the fuzz test can lower it.
var stateWordLimit = 1 << 29

// Words per slot of a buffer sized by a capacity, beyond the features and
// the gradients: the window's per-record metadata (3), the slot scratch
// (1) and the finishing pass's scratch (3); the holdout's label, weight,
// missing flag, score scratch (1) and rank scratch (3).
const (
	sagaSlotWords    = 7
	holdoutSlotWords = 7
)

var (
	_ encoding.BinaryMarshaler   = (*Ladder)(nil)
	_ encoding.BinaryUnmarshaler = (*Ladder)(nil)
	_ encoding.BinaryMarshaler   = (*Holdout)(nil)
	_ encoding.BinaryUnmarshaler = (*Holdout)(nil)
	_ encoding.BinaryMarshaler   = (*Chooser)(nil)
	_ encoding.BinaryUnmarshaler = (*Chooser)(nil)
)

// The encodings are written by window.Encoder and read by window.Decoder:
// unsigned integers as uvarints, signed ones as zig-zag varints, float64
// as their exact IEEE 754 bits (little-endian, NaN payloads kept), slices,
// strings and byte strings with a uvarint length. The helpers below add
// what this package's states need on top: the header, bounded strings and
// byte strings, the check that the input can hold what a length claims
// before anything is allocated, and the wrapping of the decoder's errors
// with ErrState.

// putHeader starts an encoding of the given type.
func putHeader(e *window.Encoder, typ byte) {
	e.PutByte(stateVersion)
	e.PutByte(typ)
}

// putString appends v with its length.
func putString(e *window.Encoder, v string) { e.PutBlob([]byte(v)) }

// header checks the version and the type byte, and returns the version.
func header(d *window.Decoder, typ byte) byte {
	v := d.Byte()
	if d.Err() == nil && (v < stateOldest || v > stateVersion) {
		d.Failf("format version %d (want %d to %d)", v, stateOldest, stateVersion)
	}
	t := d.Byte()
	if d.Err() == nil && t != typ {
		d.Failf("type %q (want %q)", t, typ)
	}
	return v
}

// need reports whether the input still holds n elements of at least size
// bytes each, and fails if not.
func need(d *window.Decoder, n, size int, what string) bool {
	if d.Err() != nil {
		return false
	}
	if n < 0 || size < 0 || (size > 0 && n > d.Len()/size) {
		d.Failf("truncated %s (%d×%d bytes, %d left)", what, n, size, d.Len())
		return false
	}
	return true
}

// blob reads a byte string of at most hi bytes; the result aliases the
// input.
func blob(d *window.Decoder, hi int, what string) []byte {
	v := d.Blob()
	if d.Err() == nil && len(v) > hi {
		d.Failf("%s of %d bytes (max %d)", what, len(v), hi)
		return nil
	}
	return v
}

// str reads a string of at most hi bytes.
func str(d *window.Decoder, hi int, what string) string { return string(blob(d, hi, what)) }

// stateErr returns the decoder's error wrapped with ErrState, or nil.
func stateErr(err error) error {
	if err == nil {
		return nil
	}
	return fmt.Errorf("%w: %v", ErrState, err)
}

// finish returns the decoder's error, or one if bytes remain, wrapped
// with ErrState.
func finish(d *window.Decoder) error { return stateErr(d.Finish()) }

// lossName returns the saved name of loss ("" for nil) or an error for a
// loss that LossByName cannot restore.
func lossName(loss Loss) (string, error) {
	if loss == nil {
		return "", nil
	}
	if kindOf(loss) == lossOther {
		return "", fmt.Errorf("%w: loss %q cannot be saved (only the built-in losses)", ErrState, loss.Name())
	}
	return loss.Name(), nil
}

// MarshalBinary returns the Holdout's state: its features and capacity,
// its loss setting (SetLoss), and the records it holds in the slots they
// occupy, so that a Holdout restored with UnmarshalBinary scores exactly
// as this one (the order of the records, and so the rounding of every
// sum, is the same). The format is described in UnmarshalBinary.
func (h *Holdout) MarshalBinary() ([]byte, error) {
	name, err := lossName(h.loss)
	if err != nil {
		return nil, err
	}
	e := window.NewEncoder(make([]byte, 0, 32+h.n*(8*(h.d+2)+2)))
	putHeader(e, stateHoldout)
	e.PutUvarint(uint64(h.d))
	e.PutUvarint(uint64(len(h.y)))
	e.PutUvarint(uint64(h.head))
	e.PutUvarint(uint64(h.n))
	putString(e, name)
	for i := range h.n {
		s := h.slot(i)
		e.PutFloat64s(h.x[s*h.d : (s+1)*h.d])
		e.PutFloat64(h.y[s])
		e.PutFloat64(h.w[s])
	}
	return e.Bytes(), nil
}

// UnmarshalBinary replaces h (which may be the zero Holdout) by the state
// that MarshalBinary saved. The format, version 5 (4 is read too: the
// same layout), is: the version byte,
// the type byte 'H', then as unsigned varints the features d, the capacity,
// the slot of the oldest record and the number of records n, the loss name
// ("" for none) with a varint length, and n records oldest first, each its
// d features with a varint length, the label and the weight, float64 as
// little-endian IEEE 754 bits. Any
// defect returns an error wrapping ErrState and leaves h unchanged.
func (h *Holdout) UnmarshalBinary(b []byte) error {
	d := window.NewDecoder(b)
	header(d, stateHoldout)
	features := d.Count("features", maxStateFeatures)
	capacity := d.Count("capacity", maxStateCap)
	head := d.Count("head", maxStateCap)
	n := d.Count("records", maxStateCap)
	name := str(d, 64, "loss")
	if d.Err() != nil {
		return stateErr(d.Err())
	}
	switch {
	case features < 1 || capacity < 1:
		d.Failf("features %d, capacity %d", features, capacity)
	case int64(capacity)*int64(features+holdoutSlotWords) > int64(stateWordLimit):
		d.Failf("capacity %d × %d features above %d words", capacity, features, stateWordLimit)
	case head >= capacity || n > capacity:
		d.Failf("head %d, %d records, capacity %d", head, n, capacity)
	}
	loss, ok := LossByName(name)
	if name != "" && !ok {
		d.Failf("unknown loss %q", name)
	}
	// A record holds its label and weight and, after a length of 1 byte
	// or more, its features: 8 bytes each.
	if !need(d, n, 8*(features+2)+1, "records") {
		return stateErr(d.Err())
	}
	nh := NewHoldout(features, capacity)
	if name != "" {
		nh.SetLoss(loss)
	}
	nh.head, nh.n = head, n
	for i := range n {
		s := nh.slot(i)
		x := nh.x[s*features : (s+1)*features]
		d.Float64sInto(x)
		nh.miss[s] = hasNaN(x)
		nh.y[s], nh.w[s] = d.Float64(), d.Float64()
	}
	if err := finish(d); err != nil {
		return err
	}
	*h = *nh
	return nil
}

// MarshalBinary returns the Chooser's state: its rule, whether it has
// started, and its current and pending choices.
func (c *Chooser) MarshalBinary() ([]byte, error) {
	e := window.NewEncoder(nil)
	putHeader(e, stateChooser)
	e.PutVarint(int64(c.Rule))
	e.PutBool(c.started)
	e.PutVarint(int64(c.current))
	e.PutVarint(int64(c.pending))
	return e.Bytes(), nil
}

// UnmarshalBinary replaces c by the state that MarshalBinary saved, so
// that the same scores then give the same choices. The format, version 5
// (4 is read too: the same layout), is: the version byte, the type byte 'C', the rule as a signed varint,
// started as a byte 0 or 1, and the current and pending choices as signed
// varints. An unknown rule or a choice below −1 is refused. Any defect
// returns an error wrapping ErrState and leaves c unchanged.
func (c *Chooser) UnmarshalBinary(b []byte) error {
	d := window.NewDecoder(b)
	header(d, stateChooser)
	rule := Rule(d.Varint())
	started := d.Bool()
	current, pending := d.Varint(), d.Varint()
	if d.Err() == nil {
		switch {
		case rule != RuleMin && rule != RuleOneSE:
			d.Failf("unknown rule %d", int64(rule))
		case current < -1 || pending < -1 || current > math.MaxInt32 || pending > math.MaxInt32:
			d.Failf("choices %d, %d out of range", current, pending)
		}
	}
	if err := finish(d); err != nil {
		return err
	}
	*c = Chooser{Rule: rule, started: started, current: int(current), pending: int(pending)}
	return nil
}
