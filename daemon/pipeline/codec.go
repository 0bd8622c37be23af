package pipeline

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// ErrState is wrapped by every error of Restore about the bytes it was
// given: truncated, trailing, of another format, or inconsistent.
var ErrState = errors.New("pipeline: bad state")

// enc appends the pieces of a state in a fixed binary layout: unsigned
// varints, float64 as their IEEE 754 bits (little-endian), length-prefixed
// byte strings.
type enc struct{ b []byte }

func (e *enc) uvarint(v uint64) { e.b = binary.AppendUvarint(e.b, v) }
func (e *enc) int(v int)        { e.b = binary.AppendVarint(e.b, int64(v)) }
func (e *enc) int64(v int64)    { e.b = binary.AppendVarint(e.b, v) }
func (e *enc) f64(v float64)    { e.b = binary.LittleEndian.AppendUint64(e.b, math.Float64bits(v)) }
func (e *enc) bytes(v []byte)   { e.uvarint(uint64(len(v))); e.b = append(e.b, v...) }
func (e *enc) str(v string)     { e.uvarint(uint64(len(v))); e.b = append(e.b, v...) }

func (e *enc) bool(v bool) {
	if v {
		e.b = append(e.b, 1)
	} else {
		e.b = append(e.b, 0)
	}
}

func (e *enc) f64s(v []float64) {
	e.uvarint(uint64(len(v)))
	for _, x := range v {
		e.f64(x)
	}
}

func (e *enc) ints(v []int) {
	e.uvarint(uint64(len(v)))
	for _, x := range v {
		e.int(x)
	}
}

func (e *enc) bools(v []bool) {
	e.uvarint(uint64(len(v)))
	for _, x := range v {
		e.bool(x)
	}
}

func (e *enc) strs(v []string) {
	e.uvarint(uint64(len(v)))
	for _, x := range v {
		e.str(x)
	}
}

// dec reads what enc wrote. The first problem sticks: later reads return
// zero values, and err reports it (wrapping ErrState).
type dec struct {
	b   []byte
	err error
}

func (d *dec) fail(format string, args ...any) {
	if d.err == nil {
		d.err = fmt.Errorf("%w: %s", ErrState, fmt.Sprintf(format, args...))
	}
	d.b = nil
}

func (d *dec) uvarint() uint64 {
	v, n := binary.Uvarint(d.b)
	if n <= 0 {
		d.fail("truncated or overlong number")
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *dec) int64() int64 {
	v, n := binary.Varint(d.b)
	if n <= 0 {
		d.fail("truncated or overlong number")
		return 0
	}
	d.b = d.b[n:]
	return v
}

func (d *dec) int() int {
	v := d.int64()
	if v < math.MinInt32 || v > math.MaxInt32 {
		d.fail("number %d out of range", v)
		return 0
	}
	return int(v)
}

func (d *dec) f64() float64 {
	if len(d.b) < 8 {
		d.fail("truncated float")
		return 0
	}
	v := math.Float64frombits(binary.LittleEndian.Uint64(d.b))
	d.b = d.b[8:]
	return v
}

func (d *dec) bool() bool {
	if len(d.b) < 1 {
		d.fail("truncated flag")
		return false
	}
	v := d.b[0]
	d.b = d.b[1:]
	if v > 1 {
		d.fail("flag %d", v)
	}
	return v == 1
}

// count reads a length whose elements take at least size bytes each, and
// refuses one the remaining bytes cannot hold (so hostile input cannot
// make a huge allocation).
func (d *dec) count(size int) int {
	n := d.uvarint()
	if d.err != nil {
		return 0
	}
	if n > uint64(len(d.b)/max(size, 1)) {
		d.fail("length %d exceeds the %d bytes left", n, len(d.b))
		return 0
	}
	return int(n)
}

func (d *dec) bytes() []byte {
	n := d.count(1)
	v := d.b[:n:n]
	d.b = d.b[n:]
	return v
}

func (d *dec) str() string { return string(d.bytes()) }

func (d *dec) f64s() []float64 {
	n := d.count(8)
	v := make([]float64, n)
	for i := range v {
		v[i] = d.f64()
	}
	return v
}

func (d *dec) ints() []int {
	n := d.count(1)
	v := make([]int, n)
	for i := range v {
		v[i] = d.int()
	}
	return v
}

func (d *dec) bools() []bool {
	n := d.count(1)
	v := make([]bool, n)
	for i := range v {
		v[i] = d.bool()
	}
	return v
}

func (d *dec) strs() []string {
	n := d.count(1)
	v := make([]string, n)
	for i := range v {
		v[i] = d.str()
	}
	return v
}

// done reports the first problem, or trailing bytes.
func (d *dec) done() error {
	if d.err == nil && len(d.b) > 0 {
		d.fail("%d bytes after the end", len(d.b))
	}
	return d.err
}
