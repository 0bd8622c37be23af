package window

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// ErrState is the sentinel wrapped by every error about a saved state: a
// truncated or over-long encoding, an unknown format version, a state of
// another type, or values no live value could hold (a negative count, a
// length that does not fit the data, a capacity beyond MaxStateCap).
var ErrState = errors.New("window: bad state")

// StateVersion is the format version written as the first byte of every
// state this package encodes (MarshalBinary of ADWIN, PageHinkley,
// ShiftReference, Ring and Timed). A decoder refuses any other version.
const StateVersion = 1

// MaxStateCap bounds every capacity, bin count and length a state may
// declare (and so what decoding may allocate): a Ring or Timed of larger
// capacity cannot be marshaled. 1<<24 values is far beyond any window this
// daemon keeps and keeps a hostile input from asking for gigabytes.
const MaxStateCap = 1 << 24

// maxStateBuckets bounds ADWIN's M in a state: memory is 64·(M+1) buckets
// whatever the width, so M is bounded on its own (Bifet & Gavaldà 2007 use
// M = 5; thousands of buckets per row are never useful).
const maxStateBuckets = 1 << 12

// Type tags, the second byte of each state, so a state of one type is
// refused by another.
const (
	tagADWIN       = 'A'
	tagPageHinkley = 'P'
	tagShift       = 'S'
	tagRing        = 'R'
	tagTimed       = 'T'
)

// Encoder appends values to a byte slice in the format of this package's
// states: unsigned integers as uvarints, signed ones as zig-zag varints
// (encoding/binary), floats as the 8 little-endian bytes of
// math.Float64bits (exact bits, NaN payloads included), slices and blobs
// prefixed with their length as a uvarint. The zero value is an empty
// encoder ready to use. Other packages may reuse it for their own states.
//
// An Encoder also carries the first error met by a writer that refuses to
// encode a value (Failf); puts still append, and the caller checks Err
// once at the end.
type Encoder struct {
	buf []byte
	err error
}

// NewEncoder returns an Encoder that appends to dst.
func NewEncoder(dst []byte) *Encoder { return &Encoder{buf: dst} }

// Bytes returns the encoded bytes (the slice given to NewEncoder extended
// by everything put since).
func (e *Encoder) Bytes() []byte { return e.buf }

// Err returns the first error recorded by Failf, or nil.
func (e *Encoder) Err() error { return e.err }

// Failf records an error wrapping ErrState unless one is already recorded:
// a value that cannot be saved.
func (e *Encoder) Failf(format string, args ...any) {
	if e.err == nil {
		e.err = fmt.Errorf("%w: %s", ErrState, fmt.Sprintf(format, args...))
	}
}

// PutByte appends one byte.
func (e *Encoder) PutByte(b byte) { e.buf = append(e.buf, b) }

// PutBool appends b as one byte, 0 or 1.
func (e *Encoder) PutBool(b bool) {
	var v byte
	if b {
		v = 1
	}
	e.buf = append(e.buf, v)
}

// PutUvarint appends x as a uvarint.
func (e *Encoder) PutUvarint(x uint64) { e.buf = binary.AppendUvarint(e.buf, x) }

// PutVarint appends x as a zig-zag varint.
func (e *Encoder) PutVarint(x int64) { e.buf = binary.AppendVarint(e.buf, x) }

// PutFloat64 appends the 8 little-endian bytes of math.Float64bits(x).
func (e *Encoder) PutFloat64(x float64) {
	e.buf = binary.LittleEndian.AppendUint64(e.buf, math.Float64bits(x))
}

// PutFloat64s appends len(xs) as a uvarint, then each value as PutFloat64.
func (e *Encoder) PutFloat64s(xs []float64) {
	e.PutUvarint(uint64(len(xs)))
	for _, x := range xs {
		e.PutFloat64(x)
	}
}

// PutBlob appends len(b) as a uvarint, then b: a nested state (another
// value's MarshalBinary) that Decoder.Blob reads back.
func (e *Encoder) PutBlob(b []byte) {
	e.PutUvarint(uint64(len(b)))
	e.buf = append(e.buf, b...)
}

// header appends the format version and the type tag.
func (e *Encoder) header(tag byte) { e.buf = append(e.buf, StateVersion, tag) }

// Decoder reads what an Encoder wrote. Errors are sticky: after the first
// (truncated input, a value out of range), every read returns the zero
// value and Err reports that first error, which wraps ErrState. A Decoder
// never panics and never allocates more than the remaining input can
// justify (and at most MaxStateCap elements).
type Decoder struct {
	buf  []byte
	off  int
	what string // type being decoded, for messages
	err  error
}

// NewDecoder returns a Decoder reading b. It does not copy b; Blob returns
// subslices of it.
func NewDecoder(b []byte) *Decoder { return &Decoder{buf: b} }

// Err returns the first error met, or nil.
func (d *Decoder) Err() error { return d.err }

// Len returns the number of bytes not yet read.
func (d *Decoder) Len() int { return len(d.buf) - d.off }

// Failf records an error (wrapping ErrState) unless one is already
// recorded; callers use it to refuse a value they validate themselves.
func (d *Decoder) Failf(format string, args ...any) {
	if d.err != nil {
		return
	}
	msg := fmt.Sprintf(format, args...)
	if d.what != "" {
		msg = d.what + ": " + msg
	}
	d.err = fmt.Errorf("%w: %s (at byte %d of %d)", ErrState, msg, d.off, len(d.buf))
}

// Finish returns Err, or an error if bytes remain unread: a state must be
// consumed exactly.
func (d *Decoder) Finish() error {
	if d.err == nil && d.Len() != 0 {
		d.Failf("%d trailing bytes", d.Len())
	}
	return d.err
}

// take returns the next n bytes, or nil after recording truncation.
func (d *Decoder) take(n int) []byte {
	if d.err != nil {
		return nil
	}
	if n < 0 || n > d.Len() {
		d.Failf("truncated: %d bytes wanted, %d left", n, d.Len())
		return nil
	}
	b := d.buf[d.off : d.off+n : d.off+n]
	d.off += n
	return b
}

// Byte reads one byte.
func (d *Decoder) Byte() byte {
	b := d.take(1)
	if b == nil {
		return 0
	}
	return b[0]
}

// Bool reads a byte that must be 0 or 1.
func (d *Decoder) Bool() bool {
	b := d.Byte()
	if b > 1 {
		d.Failf("boolean byte %d", b)
		return false
	}
	return b == 1
}

// Uvarint reads a uvarint.
func (d *Decoder) Uvarint() uint64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Uvarint(d.buf[d.off:])
	if n <= 0 {
		d.Failf("truncated or overlong uvarint")
		return 0
	}
	d.off += n
	return x
}

// Varint reads a zig-zag varint.
func (d *Decoder) Varint() int64 {
	if d.err != nil {
		return 0
	}
	x, n := binary.Varint(d.buf[d.off:])
	if n <= 0 {
		d.Failf("truncated or overlong varint")
		return 0
	}
	d.off += n
	return x
}

// Count reads a uvarint that must lie in [0, limit] (a count, a length or
// an index); what names it in the error.
func (d *Decoder) Count(what string, limit int) int {
	x := d.Uvarint()
	if d.err == nil && x > uint64(limit) {
		d.Failf("%s %d beyond %d", what, x, limit)
		return 0
	}
	return int(x)
}

// Float64 reads the 8 little-endian bytes of a float64's bits.
func (d *Decoder) Float64() float64 {
	b := d.take(8)
	if b == nil {
		return 0
	}
	return math.Float64frombits(binary.LittleEndian.Uint64(b))
}

// Float64s reads a slice written by PutFloat64s into a new slice. The
// length is checked against the remaining bytes before allocating.
func (d *Decoder) Float64s() []float64 {
	n := d.Count("float64 slice length", min(d.Len()/8, MaxStateCap))
	if d.err != nil {
		return nil
	}
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = d.Float64()
	}
	return xs
}

// Float64sInto reads a slice written by PutFloat64s into dst, whose length
// must equal the encoded length; it does not allocate.
func (d *Decoder) Float64sInto(dst []float64) {
	n := d.Uvarint()
	if d.err == nil && n != uint64(len(dst)) {
		d.Failf("float64 slice of length %d, want %d", n, len(dst))
	}
	for i := range dst {
		if d.err != nil {
			return
		}
		dst[i] = d.Float64()
	}
}

// Blob reads a length-prefixed byte string written by PutBlob and returns
// a subslice of the input (not a copy).
func (d *Decoder) Blob() []byte {
	n := d.Count("blob length", d.Len())
	return d.take(n)
}

// stateError returns an error wrapping ErrState about a value of type what.
func stateError(what, msg string) error {
	return fmt.Errorf("%w: %s: %s", ErrState, what, msg)
}

// header reads and checks the format version and the type tag; what names
// the type in later errors.
func (d *Decoder) header(tag byte, what string) {
	d.what = what
	if v := d.Byte(); d.err == nil && v != StateVersion {
		d.Failf("unknown format version %d (want %d)", v, StateVersion)
	}
	if t := d.Byte(); d.err == nil && t != tag {
		d.Failf("type tag %q, want %q", t, tag)
	}
}

// finite reads a float64 that must be finite; what names it in the error.
func (d *Decoder) finite(what string) float64 {
	x := d.Float64()
	if d.err == nil && (math.IsNaN(x) || math.IsInf(x, 0)) {
		d.Failf("%s %v is not finite", what, x)
	}
	return x
}

// int64Int reads a varint that must fit an int of this platform.
func (d *Decoder) int64Int(what string) int {
	x := d.Varint()
	if d.err == nil && int64(int(x)) != x {
		d.Failf("%s %d overflows int", what, x)
		return 0
	}
	return int(x)
}
