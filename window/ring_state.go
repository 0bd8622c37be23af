package window

var (
	_ BinaryState = (*Ring[float64])(nil)
	_ BinaryState = (*Timed[float64])(nil)
)

// BinaryState is what every stateful type of this package implements:
// encoding.BinaryMarshaler, encoding.BinaryUnmarshaler and
// encoding.BinaryAppender, with the format of this package (StateVersion).
type BinaryState interface {
	AppendBinary(b []byte) ([]byte, error)
	MarshalBinary() ([]byte, error)
	UnmarshalBinary(b []byte) error
}

// Element kinds of the Ring and Timed types that MarshalBinary supports,
// written after the type tag so a Ring[float64] state is refused by a
// Ring[int].
const (
	kindFloat64 = 'f'
	kindInt     = 'i'
	kindInt64   = 'l'
	kindUint64  = 'u'
)

// basicCodec returns the element kind and the put and get functions of the
// element types MarshalBinary supports; ok is false for any other T.
func basicCodec[T any]() (kind byte, put func(*Encoder, T), get func(*Decoder) T, ok bool) {
	var z T
	switch any(z).(type) {
	case float64:
		return kindFloat64, func(e *Encoder, v T) { e.PutFloat64(any(v).(float64)) },
			func(d *Decoder) T { return any(d.Float64()).(T) }, true
	case int:
		return kindInt, func(e *Encoder, v T) { e.PutVarint(int64(any(v).(int))) },
			func(d *Decoder) T { return any(d.int64Int("value")).(T) }, true
	case int64:
		return kindInt64, func(e *Encoder, v T) { e.PutVarint(any(v).(int64)) },
			func(d *Decoder) T { return any(d.Varint()).(T) }, true
	case uint64:
		return kindUint64, func(e *Encoder, v T) { e.PutUvarint(any(v).(uint64)) },
			func(d *Decoder) T { return any(d.Uvarint()).(T) }, true
	}
	return 0, nil, nil, false
}

// EncodeState appends the ring's state to e, each value written by put:
// the capacity, the physical slot of the oldest value, the count, then the
// values oldest first. Slots are part of the state, so a caller's side
// arrays indexed by slot stay valid after DecodeState. A ring not built by
// NewRing, or of capacity beyond MaxStateCap, is refused (e.Err).
func (r *Ring[T]) EncodeState(e *Encoder, put func(e *Encoder, v T)) {
	r.encode(e, func(e *Encoder, _ int, v T) { put(e, v) })
}

// encode is EncodeState with the slot passed to put.
func (r *Ring[T]) encode(e *Encoder, put func(e *Encoder, slot int, v T)) {
	c := len(r.buf)
	if c < 1 || c > MaxStateCap {
		e.Failf("Ring: capacity %d outside [1, %d]", c, MaxStateCap)
		return
	}
	e.PutUvarint(uint64(c))
	e.PutUvarint(uint64(r.head))
	e.PutUvarint(uint64(r.n))
	for i := range r.n {
		s := r.Slot(i)
		put(e, s, r.buf[s])
	}
}

// DecodeState replaces the ring's state, capacity included, by one that
// EncodeState wrote, each value read by get (which reports malformed data
// through d). r may be the zero value. On error (d.Err, wrapping ErrState)
// r is left unchanged; a caller decoding a larger state that holds r
// keeps it whole on a later error by decoding into a temporary Ring and
// assigning it after Decoder.Finish. Decoding allocates a new buffer of
// the saved capacity, at most MaxStateCap.
func (r *Ring[T]) DecodeState(d *Decoder, get func(d *Decoder) T) error {
	t, err := decodeRing(d, nil, func(d *Decoder, _ int) T { return get(d) })
	if err == nil {
		*r = t
	}
	return err
}

// decodeRing reads a ring written by encode; begin (if not nil) is told
// the capacity before any value is read, and get is passed each value's
// slot.
func decodeRing[T any](d *Decoder, begin func(capacity int), get func(d *Decoder, slot int) T) (Ring[T], error) {
	c := d.Count("capacity", MaxStateCap)
	if d.Err() == nil && c < 1 {
		d.Failf("capacity 0")
	}
	head := d.Count("head", max(c-1, 0))
	n := d.Count("length", c)
	if d.Err() != nil {
		return Ring[T]{}, d.Err()
	}
	t := Ring[T]{buf: make([]T, c), head: head, n: n}
	if begin != nil {
		begin(c)
	}
	for i := 0; i < n && d.Err() == nil; i++ {
		s := t.Slot(i)
		t.buf[s] = get(d, s)
	}
	return t, d.Err()
}

// AppendBinary appends the ring's state to b (see MarshalBinary).
func (r *Ring[T]) AppendBinary(b []byte) ([]byte, error) {
	kind, put, _, ok := basicCodec[T]()
	e := NewEncoder(b)
	if !ok {
		e.Failf("Ring: MarshalBinary supports float64, int, int64 and uint64 values; use EncodeState")
		return b, e.Err()
	}
	e.header(tagRing)
	e.PutByte(kind)
	r.EncodeState(e, put)
	if e.Err() != nil {
		return b, e.Err()
	}
	return e.Bytes(), nil
}

// MarshalBinary returns the ring's state when T is float64, int, int64 or
// uint64 (other T: use EncodeState with an encoder for T). Format (version
// StateVersion): version, 'R', element kind, then what EncodeState writes
// (floats as exact bits, integers as varints).
func (r *Ring[T]) MarshalBinary() ([]byte, error) { return r.AppendBinary(nil) }

// UnmarshalBinary replaces the ring's state, capacity and slots included,
// by one MarshalBinary returned for the same T; r may be the zero value.
// Malformed input is refused with an error wrapping ErrState and r is left
// unchanged.
func (r *Ring[T]) UnmarshalBinary(b []byte) error {
	kind, _, get, ok := basicCodec[T]()
	d := NewDecoder(b)
	if !ok {
		d.Failf("Ring: UnmarshalBinary supports float64, int, int64 and uint64 values; use DecodeState")
		return d.Err()
	}
	d.header(tagRing, "Ring")
	if k := d.Byte(); d.Err() == nil && k != kind {
		d.Failf("element kind %q, want %q", k, kind)
	}
	t, err := decodeRing(d, nil, func(d *Decoder, _ int) T { return get(d) })
	if err != nil {
		return err
	}
	if err := d.Finish(); err != nil {
		return err
	}
	*r = t
	return nil
}

// EncodeState appends the state of w to e, each value written by put: the
// span, Latest, then the ring (as Ring.EncodeState) with each value
// preceded by its stamp. A Timed not built by NewTimed is refused (e.Err).
func (w *Timed[T]) EncodeState(e *Encoder, put func(e *Encoder, v T)) {
	if w.ring == nil {
		e.Failf("Timed: not built by NewTimed")
		return
	}
	e.PutVarint(w.span)
	e.PutVarint(w.latest)
	w.ring.encode(e, func(e *Encoder, s int, v T) {
		e.PutVarint(w.stamp[s])
		put(e, v)
	})
}

// DecodeState replaces the state of w, capacity and span included, by one
// that EncodeState wrote, each value read by get; w may be the zero value.
// On error (wrapping ErrState) w is left unchanged.
func (w *Timed[T]) DecodeState(d *Decoder, get func(d *Decoder) T) error {
	span, latest := d.Varint(), d.Varint()
	if d.Err() == nil && span < 0 {
		d.Failf("negative span %d", span)
	}
	if d.Err() != nil {
		return d.Err()
	}
	var stamps []int64
	ring, err := decodeRing(d, func(c int) { stamps = make([]int64, c) }, func(d *Decoder, s int) T {
		st := d.Varint()
		if d.Err() == nil && st > latest {
			d.Failf("stamp %d after latest %d", st, latest)
		}
		stamps[s] = st
		return get(d)
	})
	if err != nil {
		return err
	}
	*w = Timed[T]{ring: &ring, stamp: stamps, span: span, latest: latest}
	return nil
}

// AppendBinary appends the state of w to b (see MarshalBinary).
func (w *Timed[T]) AppendBinary(b []byte) ([]byte, error) {
	kind, put, _, ok := basicCodec[T]()
	e := NewEncoder(b)
	if !ok {
		e.Failf("Timed: MarshalBinary supports float64, int, int64 and uint64 values; use EncodeState")
		return b, e.Err()
	}
	e.header(tagTimed)
	e.PutByte(kind)
	w.EncodeState(e, put)
	if e.Err() != nil {
		return b, e.Err()
	}
	return e.Bytes(), nil
}

// MarshalBinary returns the state of w when T is float64, int, int64 or
// uint64 (other T: use EncodeState). Format (version StateVersion):
// version, 'T', element kind, then what EncodeState writes.
func (w *Timed[T]) MarshalBinary() ([]byte, error) { return w.AppendBinary(nil) }

// UnmarshalBinary replaces the state of w by one MarshalBinary returned
// for the same T; w may be the zero value. Malformed input is refused with
// an error wrapping ErrState and w is left unchanged.
func (w *Timed[T]) UnmarshalBinary(b []byte) error {
	kind, _, get, ok := basicCodec[T]()
	d := NewDecoder(b)
	if !ok {
		d.Failf("Timed: UnmarshalBinary supports float64, int, int64 and uint64 values; use DecodeState")
		return d.Err()
	}
	d.header(tagTimed, "Timed")
	if k := d.Byte(); d.Err() == nil && k != kind {
		d.Failf("element kind %q, want %q", k, kind)
	}
	var t Timed[T]
	if err := t.DecodeState(d, get); err != nil {
		return err
	}
	if err := d.Finish(); err != nil {
		return err
	}
	*w = t
	return nil
}
