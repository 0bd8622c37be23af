package window

import (
	"encoding"
	"math"
)

var (
	_ encoding.BinaryMarshaler   = (*ADWIN)(nil)
	_ encoding.BinaryUnmarshaler = (*ADWIN)(nil)
	_ encoding.BinaryAppender    = (*ADWIN)(nil)
	_ encoding.BinaryMarshaler   = (*PageHinkley)(nil)
	_ encoding.BinaryUnmarshaler = (*PageHinkley)(nil)
	_ encoding.BinaryAppender    = (*PageHinkley)(nil)
)

const maxInt = int(^uint(0) >> 1)

// adwinConfigError returns why an ADWIN configuration is not one that
// NewADWINOptions gives, or "".
func adwinConfigError(delta float64, m, clock int, rng float64) string {
	switch {
	case !(delta > 0 && delta < 1):
		return "delta outside (0, 1)"
	case m < 1 || m > maxStateBuckets:
		return "buckets outside [1, 4096]"
	case clock < 1:
		return "clock < 1"
	case !(rng > 0) || math.IsInf(rng, 0):
		return "range not positive and finite"
	}
	return ""
}

// AppendBinary appends the state of a to b (see MarshalBinary).
func (a *ADWIN) AppendBinary(b []byte) ([]byte, error) {
	msg := adwinConfigError(a.delta, a.m, a.clock, a.rng)
	if a.sum == nil {
		msg = "not built by NewADWIN"
	}
	if msg != "" {
		return b, stateError("ADWIN", msg)
	}
	e := NewEncoder(b)
	e.header(tagADWIN)
	e.PutFloat64(a.delta)
	e.PutUvarint(uint64(a.m))
	e.PutUvarint(uint64(a.clock))
	e.PutFloat64(a.rng)
	e.PutUvarint(uint64(a.n))
	e.PutFloat64(a.tot)
	e.PutFloat64(a.v)
	e.PutUvarint(uint64(a.tick))
	e.PutUvarint(uint64(a.drop))
	e.PutUvarint(uint64(a.rows))
	for r := range a.rows {
		e.PutUvarint(uint64(a.cnt[r]))
		i := r * (a.m + 1)
		for k := range a.cnt[r] {
			e.PutFloat64(a.sum[i+k])
			e.PutFloat64(a.m2[i+k])
		}
	}
	return e.Bytes(), nil
}

// MarshalBinary returns the whole state of a: its options (δ, M, Clock,
// Range), the window totals, the clock phase, Dropped and every bucket of
// the exponential histogram, floats as exact bits. Format (version
// StateVersion): version, 'A', δ, M, Clock, Range, |W|, ΣW, squared
// deviations, inserts since the last check, Dropped, rows, then per row
// its bucket count and each bucket's sum and squared deviations. It fails
// (wrapping ErrState) only for an ADWIN not built by a constructor or
// with Buckets beyond 4096 (memory is 64·(M+1) buckets whatever the
// width, so a state's M is bounded to keep decoding cheap).
func (a *ADWIN) MarshalBinary() ([]byte, error) { return a.AppendBinary(nil) }

// UnmarshalBinary replaces a's whole state, options included, by one
// MarshalBinary returned; a may be the zero value or any ADWIN. The
// restored value continues bit for bit as the saved one would have. Any
// malformed input is refused with an error wrapping ErrState, and a is
// then left unchanged.
func (a *ADWIN) UnmarshalBinary(b []byte) error {
	d := NewDecoder(b)
	d.header(tagADWIN, "ADWIN")
	t := ADWIN{delta: d.Float64()}
	t.m = d.Count("buckets", maxStateBuckets)
	t.clock = d.Count("clock", maxInt)
	t.rng = d.Float64()
	if msg := adwinConfigError(t.delta, t.m, t.clock, t.rng); d.Err() == nil && msg != "" {
		d.Failf("%s", msg)
	}
	t.n = d.Count("width", maxInt)
	t.tot, t.v = d.Float64(), d.Float64()
	t.tick = d.Count("tick", max(t.clock-1, 0))
	t.drop = d.Count("dropped", maxInt)
	t.rows = d.Count("rows", adwinRows)
	if d.Err() != nil {
		return d.Err()
	}
	w := t.m + 1
	t.sum, t.m2 = make([]float64, adwinRows*w), make([]float64, adwinRows*w)
	var width uint64
	for r := range t.rows {
		c := d.Count("buckets in a row", t.m)
		if d.Err() == nil && c > d.Len()/16 {
			d.Failf("row %d of %d buckets does not fit the data", r, c)
		}
		if d.Err() != nil {
			return d.Err()
		}
		t.cnt[r] = c
		for k := range c {
			t.sum[r*w+k], t.m2[r*w+k] = d.Float64(), d.Float64()
		}
		if uint64(c) > (uint64(maxInt)-width)>>r {
			d.Failf("buckets hold more than an int of values")
		}
		width += uint64(c) << r
	}
	if d.Err() == nil && t.rows > 0 && t.cnt[t.rows-1] == 0 {
		d.Failf("top row %d is empty", t.rows-1)
	}
	if d.Err() == nil && width != uint64(t.n) {
		d.Failf("width %d, buckets hold %d", t.n, width)
	}
	if err := d.Finish(); err != nil {
		return err
	}
	*a = t
	return nil
}

// phConfigError returns why a Page-Hinkley configuration is not one that
// NewPageHinkley gives, or "".
func phConfigError(delta, lambda, alpha float64, minN int) string {
	switch {
	case !(delta > 0) || math.IsInf(delta, 0):
		return "delta not positive and finite"
	case !(lambda > 0) || math.IsInf(lambda, 0):
		return "threshold not positive and finite"
	case !(alpha > 0 && alpha <= 1):
		return "alpha outside (0, 1]"
	case minN < 1:
		return "min instances < 1"
	}
	return ""
}

// AppendBinary appends the state of p to b (see MarshalBinary).
func (p *PageHinkley) AppendBinary(b []byte) ([]byte, error) {
	if msg := phConfigError(p.delta, p.lambda, p.alpha, p.minN); msg != "" {
		return b, stateError("PageHinkley", msg+" (not built by NewPageHinkley)")
	}
	e := NewEncoder(b)
	e.header(tagPageHinkley)
	e.PutFloat64(p.delta)
	e.PutFloat64(p.lambda)
	e.PutFloat64(p.alpha)
	e.PutUvarint(uint64(p.minN))
	e.PutUvarint(uint64(p.n))
	e.PutFloat64(p.mean)
	e.PutFloat64(p.ph)
	e.PutBool(p.fired)
	return e.Bytes(), nil
}

// MarshalBinary returns the whole state of p: its options (δ, λ, α,
// MinInstances), the count, running mean and statistic, and whether a
// change was just signalled (so the next Add restarts). Format (version
// StateVersion): version, 'P', δ, λ, α, MinInstances, count, mean, PH,
// fired. It fails (wrapping ErrState) only for a PageHinkley not built by
// NewPageHinkley.
func (p *PageHinkley) MarshalBinary() ([]byte, error) { return p.AppendBinary(nil) }

// UnmarshalBinary replaces p's whole state, options included, by one
// MarshalBinary returned; p may be the zero value. Malformed input is
// refused with an error wrapping ErrState and p is left unchanged.
func (p *PageHinkley) UnmarshalBinary(b []byte) error {
	d := NewDecoder(b)
	d.header(tagPageHinkley, "PageHinkley")
	t := PageHinkley{delta: d.Float64(), lambda: d.Float64(), alpha: d.Float64()}
	t.minN = d.Count("min instances", maxInt)
	if msg := phConfigError(t.delta, t.lambda, t.alpha, t.minN); d.Err() == nil && msg != "" {
		d.Failf("%s", msg)
	}
	t.n = d.Count("count", maxInt)
	t.mean, t.ph = d.Float64(), d.Float64()
	t.fired = d.Bool()
	if d.Err() == nil && t.fired && t.n < t.minN {
		d.Failf("signalled after %d values, fewer than min instances %d", t.n, t.minN)
	}
	if err := d.Finish(); err != nil {
		return err
	}
	*p = t
	return nil
}
