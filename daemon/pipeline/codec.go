package pipeline

import (
	"errors"
	"fmt"
	"math"

	"lariat/window"
)

// ErrState is wrapped by every error of Restore about the bytes it was
// given: truncated, trailing, of another format, or inconsistent.
var ErrState = errors.New("pipeline: bad state")

// enc writes a pipeline state with window's state codec (the layout every
// saved state of lariat uses: uvarints, zig-zag varints, float64 bits,
// length-prefixed blobs), adding the pipeline's own composite types.
type enc struct{ *window.Encoder }

func newEnc() enc              { return enc{window.NewEncoder(make([]byte, 0, 1<<16))} }
func (e enc) uvarint(v uint64) { e.PutUvarint(v) }
func (e enc) int(v int)        { e.PutVarint(int64(v)) }
func (e enc) int64(v int64)    { e.PutVarint(v) }
func (e enc) f64(v float64)    { e.PutFloat64(v) }
func (e enc) bool(v bool)      { e.PutBool(v) }
func (e enc) bytes(v []byte)   { e.PutBlob(v) }
func (e enc) str(v string)     { e.PutBlob([]byte(v)) }
func (e enc) f64s(v []float64) { e.PutFloat64s(v) }
func (e enc) ints(v []int)     { e.uvarint(uint64(len(v))); forEach(v, e.int) }
func (e enc) bools(v []bool)   { e.uvarint(uint64(len(v))); forEach(v, e.bool) }
func (e enc) strs(v []string)  { e.uvarint(uint64(len(v))); forEach(v, e.str) }
func forEach[T any](v []T, f func(T)) {
	for _, x := range v {
		f(x)
	}
}

// dec reads what enc wrote. The first problem sticks (window.Decoder);
// done reports it wrapped in ErrState.
type dec struct{ *window.Decoder }

func newDec(b []byte) dec             { return dec{window.NewDecoder(b)} }
func (d dec) failed() bool            { return d.Err() != nil }
func (d dec) fail(f string, a ...any) { d.Failf(f, a...) }
func (d dec) uvarint() uint64         { return d.Uvarint() }
func (d dec) int64() int64            { return d.Varint() }
func (d dec) f64() float64            { return d.Float64() }
func (d dec) bool() bool              { return d.Bool() }
func (d dec) bytes() []byte           { return d.Blob() }
func (d dec) str() string             { return string(d.Blob()) }
func (d dec) f64s() []float64         { return d.Float64s() }

func (d dec) int() int {
	v := d.Varint()
	if v < math.MinInt32 || v > math.MaxInt32 {
		d.Failf("number %d out of range", v)
		return 0
	}
	return int(v)
}

// count reads a length whose elements take at least size bytes each, and
// refuses one the remaining bytes cannot hold (so hostile input cannot
// make a huge allocation).
func (d dec) count(size int) int { return d.Count("length", d.Len()/max(size, 1)) }

func (d dec) ints() []int {
	v := make([]int, d.count(1))
	for i := range v {
		v[i] = d.int()
	}
	return v
}

func (d dec) bools() []bool {
	v := make([]bool, d.count(1))
	for i := range v {
		v[i] = d.bool()
	}
	return v
}

func (d dec) strs() []string {
	v := make([]string, d.count(1))
	for i := range v {
		v[i] = d.str()
	}
	return v
}

// err returns the first problem, wrapped in ErrState.
func (d dec) err() error {
	if err := d.Err(); err != nil {
		return fmt.Errorf("%w: %v", ErrState, err)
	}
	return nil
}

// done reports the first problem, or trailing bytes, wrapped in ErrState.
func (d dec) done() error {
	if err := d.Finish(); err != nil {
		return fmt.Errorf("%w: %v", ErrState, err)
	}
	return nil
}
