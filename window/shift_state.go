package window

var (
	_ BinaryState = (*ADWIN)(nil)
	_ BinaryState = (*PageHinkley)(nil)
	_ BinaryState = (*ShiftReference)(nil)
)

// AppendBinary appends the state of r to b (see MarshalBinary).
func (r *ShiftReference) AppendBinary(b []byte) ([]byte, error) {
	if r.bins < 0 || r.bins > MaxStateCap || (r.bins == 0 && len(r.mean) > 0) {
		return b, stateError("ShiftReference", "not built by NewShiftReference")
	}
	e := NewEncoder(b)
	e.header(tagShift)
	e.PutUvarint(uint64(r.bins))
	e.PutUvarint(uint64(len(r.mean)))
	for j := range r.mean {
		e.PutUvarint(uint64(r.n[j]))
		e.PutFloat64(r.mean[j])
		e.PutFloat64(r.std[j])
		for _, x := range r.edges[j] {
			e.PutFloat64(x)
		}
		for _, x := range r.frac[j] {
			e.PutFloat64(x)
		}
	}
	return e.Bytes(), nil
}

// MarshalBinary returns the whole reference: the bin count B and, per
// feature, its count of finite values, mean, standard deviation, B−1
// edges and B fractions, floats as exact bits. Format (version
// StateVersion): version, 'S', B, features, then per feature count, mean,
// std, edges, fractions (their lengths follow from B). The zero value is
// saved as a reference of no features.
func (r *ShiftReference) MarshalBinary() ([]byte, error) { return r.AppendBinary(nil) }

// UnmarshalBinary replaces r by a reference MarshalBinary returned; r may
// be the zero value. Compare on the restored reference gives bit-identical
// results. Malformed input is refused with an error wrapping ErrState and
// r is left unchanged.
func (r *ShiftReference) UnmarshalBinary(b []byte) error {
	d := NewDecoder(b)
	d.header(tagShift, "ShiftReference")
	bins := d.Count("bins", MaxStateCap)
	// Each feature takes at least a 1-byte count and 2·B+1 floats.
	per := 1 + 8*(2*bins+1)
	nf := d.Count("features", d.Len()/per)
	if d.Err() == nil && bins == 0 && nf > 0 {
		d.Failf("%d features with 0 bins", nf)
	}
	if d.Err() != nil {
		return d.Err()
	}
	t := ShiftReference{
		bins: bins, n: make([]int, nf), mean: make([]float64, nf), std: make([]float64, nf),
		edges: make([][]float64, nf), frac: make([][]float64, nf),
	}
	if nf > 0 {
		t.counts = make([]float64, bins)
	}
	for j := 0; j < nf && d.Err() == nil; j++ {
		t.n[j] = d.Count("count", maxInt)
		t.mean[j], t.std[j] = d.Float64(), d.Float64()
		t.edges[j], t.frac[j] = make([]float64, bins-1), make([]float64, bins)
		for i := range t.edges[j] {
			t.edges[j][i] = d.Float64()
		}
		for i := range t.frac[j] {
			t.frac[j][i] = d.Float64()
		}
	}
	if err := d.Finish(); err != nil {
		return err
	}
	*r = t
	return nil
}
