package online

import (
	"encoding"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"slices"
)

// ErrState reports a saved state that cannot be restored: truncated,
// followed by extra bytes, of an unknown format version or type, or
// inconsistent (sizes that do not match, values out of range). The
// restoring call changes nothing when it returns an error wrapping it.
var ErrState = errors.New("online: bad state")

// stateVersion is the first byte of every encoding made by MarshalBinary
// in this package; the second byte names the type (stateLadder, ...).
// Version 1 is the only one so far. A change to the saved fields or
// their order takes a new version.
const stateVersion = 1

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

// encoder appends the fields of a state: unsigned and signed varints,
// float64 as their exact IEEE 754 bits (little-endian, NaN payloads
// kept), strings and byte strings with a length prefix.
type encoder struct{ b []byte }

// header starts an encoding of the given type.
func (e *encoder) header(typ byte) { e.b = append(e.b, stateVersion, typ) }

func (e *encoder) uint(v uint64) { e.b = binary.AppendUvarint(e.b, v) }
func (e *encoder) int(v int)     { e.b = binary.AppendUvarint(e.b, uint64(v)) }
func (e *encoder) int64(v int64) { e.b = binary.AppendVarint(e.b, v) }
func (e *encoder) u64(v uint64)  { e.b = binary.LittleEndian.AppendUint64(e.b, v) }
func (e *encoder) f(v float64)   { e.u64(math.Float64bits(v)) }

// fs appends the values of v; their number is known from context.
func (e *encoder) fs(v []float64) {
	n := len(e.b)
	e.b = slices.Grow(e.b, 8*len(v))[:n+8*len(v)]
	for i, x := range v {
		binary.LittleEndian.PutUint64(e.b[n+8*i:], math.Float64bits(x))
	}
}

// flen appends len(v) and then v.
func (e *encoder) flen(v []float64) {
	e.int(len(v))
	e.fs(v)
}

func (e *encoder) bytes(v []byte) {
	e.int(len(v))
	e.b = append(e.b, v...)
}

func (e *encoder) str(v string) {
	e.int(len(v))
	e.b = append(e.b, v...)
}

func (e *encoder) bool(v bool) {
	var c byte
	if v {
		c = 1
	}
	e.b = append(e.b, c)
}

// decoder reads what encoder wrote. The first failure sticks: every later
// read returns a zero value, and err reports it wrapped with ErrState.
// Reads check the remaining length first, so no read panics or allocates
// more than the input holds.
type decoder struct {
	b   []byte
	err error
}

// fail records the first failure.
func (d *decoder) fail(format string, a ...any) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: "+format, append([]any{ErrState}, a...)...)
	}
	d.b = nil
}

// header checks the version and the type byte.
func (d *decoder) header(typ byte) {
	if len(d.b) < 2 {
		d.fail("truncated header")
		return
	}
	if d.b[0] != stateVersion {
		d.fail("format version %d (want %d)", d.b[0], stateVersion)
		return
	}
	if d.b[1] != typ {
		d.fail("type %q (want %q)", d.b[1], typ)
		return
	}
	d.b = d.b[2:]
}

// need reports whether n more bytes remain (n elements of size bytes),
// and fails if not.
func (d *decoder) need(n, size int, what string) bool {
	if d.err != nil {
		return false
	}
	if n < 0 || size < 0 || (size > 0 && n > len(d.b)/size) {
		d.fail("truncated %s (%d×%d bytes, %d left)", what, n, size, len(d.b))
		return false
	}
	return true
}

func (d *decoder) uint() uint64 {
	if d.err != nil {
		return 0
	}
	v, k := binary.Uvarint(d.b)
	if k <= 0 {
		d.fail("truncated or overlong varint")
		return 0
	}
	d.b = d.b[k:]
	return v
}

// int reads an unsigned varint and fails unless it is at most hi.
func (d *decoder) int(hi int, what string) int {
	v := d.uint()
	if v > uint64(hi) {
		d.fail("%s %d out of range (max %d)", what, v, hi)
		return 0
	}
	return int(v)
}

func (d *decoder) int64() int64 {
	if d.err != nil {
		return 0
	}
	v, k := binary.Varint(d.b)
	if k <= 0 {
		d.fail("truncated or overlong varint")
		return 0
	}
	d.b = d.b[k:]
	return v
}

func (d *decoder) u64() uint64 {
	if !d.need(1, 8, "uint64") {
		return 0
	}
	v := binary.LittleEndian.Uint64(d.b)
	d.b = d.b[8:]
	return v
}

func (d *decoder) f() float64 { return math.Float64frombits(d.u64()) }

// fs reads len(dst) values into dst.
func (d *decoder) fs(dst []float64, what string) {
	if !d.need(len(dst), 8, what) {
		return
	}
	for i := range dst {
		dst[i] = math.Float64frombits(binary.LittleEndian.Uint64(d.b[8*i:]))
	}
	d.b = d.b[8*len(dst):]
}

// flen reads a length, which must be len(dst), and then dst.
func (d *decoder) flen(dst []float64, what string) {
	if n := d.int(maxStateInt, what); d.err == nil && n != len(dst) {
		d.fail("%s: %d values, want %d", what, n, len(dst))
	}
	d.fs(dst, what)
}

// bytes reads a byte string of at most hi bytes; the result aliases the
// input.
func (d *decoder) bytes(hi int, what string) []byte {
	n := d.int(hi, what)
	if !d.need(n, 1, what) {
		return nil
	}
	v := d.b[:n:n]
	d.b = d.b[n:]
	return v
}

func (d *decoder) str(hi int, what string) string { return string(d.bytes(hi, what)) }

func (d *decoder) bool(what string) bool {
	if !d.need(1, 1, what) {
		return false
	}
	c := d.b[0]
	d.b = d.b[1:]
	if c > 1 {
		d.fail("%s: bool byte %d", what, c)
	}
	return c == 1
}

// end fails if bytes remain and returns the error, if any.
func (d *decoder) end() error {
	if d.err == nil && len(d.b) > 0 {
		d.fail("%d trailing bytes", len(d.b))
	}
	return d.err
}

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
	e := encoder{b: make([]byte, 0, 32+h.n*8*(h.d+2))}
	e.header(stateHoldout)
	e.int(h.d)
	e.int(len(h.y))
	e.int(h.head)
	e.int(h.n)
	e.str(name)
	for i := range h.n {
		s := h.slot(i)
		e.fs(h.x[s*h.d : (s+1)*h.d])
		e.f(h.y[s])
		e.f(h.w[s])
	}
	return e.b, nil
}

// UnmarshalBinary replaces h (which may be the zero Holdout) by the state
// that MarshalBinary saved. The format, version 1, is: the version byte 1,
// the type byte 'H', then as unsigned varints the features d, the capacity,
// the slot of the oldest record and the number of records n, the loss name
// ("" for none) with a varint length, and n records oldest first, each d
// features, the label and the weight as little-endian IEEE 754 bits. Any
// defect returns an error wrapping ErrState and leaves h unchanged.
func (h *Holdout) UnmarshalBinary(b []byte) error {
	d := decoder{b: b}
	d.header(stateHoldout)
	features := d.int(maxStateFeatures, "features")
	capacity := d.int(maxStateCap, "capacity")
	head := d.int(maxStateCap, "head")
	n := d.int(maxStateCap, "records")
	name := d.str(64, "loss")
	if d.err != nil {
		return d.err
	}
	switch {
	case features < 1 || capacity < 1:
		d.fail("features %d, capacity %d", features, capacity)
	case int64(capacity)*int64(features+holdoutSlotWords) > int64(stateWordLimit):
		d.fail("capacity %d × %d features above %d words", capacity, features, stateWordLimit)
	case head >= capacity || n > capacity:
		d.fail("head %d, %d records, capacity %d", head, n, capacity)
	}
	loss, ok := LossByName(name)
	if name != "" && !ok {
		d.fail("unknown loss %q", name)
	}
	if !d.need(n, 8*(features+2), "records") {
		return d.err
	}
	nh := NewHoldout(features, capacity)
	if name != "" {
		nh.SetLoss(loss)
	}
	nh.head, nh.n = head, n
	for i := range n {
		s := nh.slot(i)
		x := nh.x[s*features : (s+1)*features]
		d.fs(x, "features")
		nh.miss[s] = hasNaN(x)
		nh.y[s], nh.w[s] = d.f(), d.f()
	}
	if err := d.end(); err != nil {
		return err
	}
	*h = *nh
	return nil
}

// MarshalBinary returns the Chooser's state: its rule, whether it has
// started, and its current and pending choices.
func (c *Chooser) MarshalBinary() ([]byte, error) {
	e := encoder{}
	e.header(stateChooser)
	e.int64(int64(c.Rule))
	e.bool(c.started)
	e.int64(int64(c.current))
	e.int64(int64(c.pending))
	return e.b, nil
}

// UnmarshalBinary replaces c by the state that MarshalBinary saved, so
// that the same scores then give the same choices. The format, version 1,
// is: the version byte 1, the type byte 'C', the rule as a signed varint,
// started as a byte 0 or 1, and the current and pending choices as signed
// varints. An unknown rule or a choice below −1 is refused. Any defect
// returns an error wrapping ErrState and leaves c unchanged.
func (c *Chooser) UnmarshalBinary(b []byte) error {
	d := decoder{b: b}
	d.header(stateChooser)
	rule := Rule(d.int64())
	started := d.bool("started")
	current, pending := d.int64(), d.int64()
	if d.err == nil {
		switch {
		case rule != RuleMin && rule != RuleOneSE:
			d.fail("unknown rule %d", int64(rule))
		case current < -1 || pending < -1 || current > math.MaxInt32 || pending > math.MaxInt32:
			d.fail("choices %d, %d out of range", current, pending)
		}
	}
	if err := d.end(); err != nil {
		return err
	}
	*c = Chooser{Rule: rule, started: started, current: int(current), pending: int(pending)}
	return nil
}
