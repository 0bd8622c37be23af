package window

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func b2u(b bool) uint64 {
	if b {
		return 1
	}
	return 0
}

// streamCase is a stateful value fed one input per step. step applies the
// i-th input x and appends every observable output, as bits, to out;
// out[0] is non-zero when the step was an event (a change, an eviction).
type streamCase struct {
	name  string
	build func() BinaryState
	fresh func() BinaryState // restore target
	input func(r *rand.Rand, i int) float64
	step  func(s BinaryState, i int, x float64, out []uint64) []uint64
	n     int
	snaps []int // steps after which to snapshot, besides the first events
}

// runContinuation feeds c's stream to one value, snapshots it at c.snaps
// and after its first three events, restores each snapshot into c.fresh()
// and feeds the continuation to every restored value, requiring the same
// outputs, bit for bit, at every step and the same state at the end.
func runContinuation(t *testing.T, c streamCase) {
	t.Helper()
	r := rand.New(rand.NewPCG(7, uint64(len(c.name))))
	orig := c.build()
	type clone struct {
		s    BinaryState
		from int
	}
	var clones []clone
	var want, got []uint64
	events := 0
	for i := range c.n {
		x := c.input(r, i)
		want = c.step(orig, i, x, want[:0])
		for _, cl := range clones {
			got = c.step(cl.s, i, x, got[:0])
			if !slices.Equal(want, got) {
				t.Fatalf("restored after step %d: step %d gives %v, want %v", cl.from, i, got, want)
			}
		}
		snap := slices.Contains(c.snaps, i) || (want[0] != 0 && events < 3)
		if want[0] != 0 {
			events++
		}
		if snap {
			b, err := orig.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			y := c.fresh()
			if err := y.UnmarshalBinary(b); err != nil {
				t.Fatalf("step %d: %v", i, err)
			}
			if b2, _ := y.MarshalBinary(); !bytes.Equal(b, b2) {
				t.Fatalf("step %d: restored value marshals differently", i)
			}
			clones = append(clones, clone{y, i})
		}
	}
	if events == 0 {
		t.Errorf("no event in %d steps; the stream does not exercise the state", c.n)
	}
	final, _ := orig.MarshalBinary()
	for _, cl := range clones {
		if b, _ := cl.s.MarshalBinary(); !bytes.Equal(b, final) {
			t.Errorf("restored after step %d: final state differs", cl.from)
		}
	}
}

// shifting returns inputs in [0, scale) whose mean moves every period
// steps, with a NaN now and then (ignored by the detectors).
func shifting(period int, scale float64) func(r *rand.Rand, i int) float64 {
	return func(r *rand.Rand, i int) float64 {
		if r.IntN(500) == 0 {
			return math.NaN()
		}
		base := []float64{0.2, 0.7, 0.4, 0.9}[i/period%4]
		return scale * min(max(base+0.15*r.NormFloat64(), 0), 0.999)
	}
}

func adwinStep(s BinaryState, _ int, x float64, out []uint64) []uint64 {
	a := s.(*ADWIN)
	c := a.Add(x)
	return append(out, b2u(c), uint64(a.Width()), math.Float64bits(a.Mean()),
		math.Float64bits(a.Variance()), uint64(a.Dropped()), math.Float64bits(a.Delta()))
}

func phStep(s BinaryState, _ int, x float64, out []uint64) []uint64 {
	p := s.(*PageHinkley)
	c := p.Add(x)
	return append(out, b2u(c), math.Float64bits(p.Statistic()), uint64(p.Count()),
		math.Float64bits(p.Threshold()))
}

// ringStep pops on small x and pushes otherwise.
func ringStep(s BinaryState, _ int, x float64, out []uint64) []uint64 {
	r := s.(*Ring[float64])
	var ev float64
	var ok bool
	if x < 0.25 {
		ev, ok = r.PopOldest()
	} else {
		ev, ok = r.Push(x)
	}
	out = append(out, b2u(ok), math.Float64bits(ev), uint64(r.Len()), uint64(r.Cap()))
	for i, v := range r.All() {
		out = append(out, uint64(r.Slot(i)), math.Float64bits(v))
	}
	return out
}

func ringIntStep(s BinaryState, _ int, x float64, out []uint64) []uint64 {
	r := s.(*Ring[int])
	ev, ok := r.Push(int(x*2e6) - 1e6)
	out = append(out, b2u(ok), uint64(ev), uint64(r.Len()))
	for i, v := range r.All() {
		out = append(out, uint64(r.Slot(i)), uint64(v))
	}
	return out
}

// timedStep pushes with a jittered stamp, and now and then keeps only the
// newest or evicts by its own cutoff; out[0] counts evictions.
func timedStep(s BinaryState, i int, x float64, out []uint64) []uint64 {
	w := s.(*Timed[float64])
	out = append(out, 0)
	ev := func(slot int, v float64) {
		out[0]++
		out = append(out, uint64(slot), math.Float64bits(v))
	}
	switch {
	case x < 0.03:
		w.KeepNewest(3, ev)
	case x < 0.06:
		w.EvictOlder(w.Latest()-10, ev)
	default:
		slot := w.Push(int64(3*i)+int64(x*40)-20, x, ev)
		out = append(out, uint64(slot))
	}
	out = append(out, uint64(w.Len()), uint64(w.Latest()))
	for i, v := range w.All() {
		out = append(out, uint64(w.Slot(i)), uint64(w.Stamp(i)), math.Float64bits(v))
	}
	return out
}

// pair stands for a caller's element type (as online keeps labels,
// weights and stamps); pairRing saves it with EncodeState.
type pair struct {
	y float64
	t int64
}

type pairRing struct{ Ring[pair] }

func (p *pairRing) AppendBinary(b []byte) ([]byte, error) {
	e := NewEncoder(b)
	e.PutByte(9) // the caller's own version
	p.EncodeState(e, func(e *Encoder, v pair) { e.PutFloat64(v.y); e.PutVarint(v.t) })
	return e.Bytes(), e.Err()
}

func (p *pairRing) MarshalBinary() ([]byte, error) { return p.AppendBinary(nil) }

func (p *pairRing) UnmarshalBinary(b []byte) error {
	d := NewDecoder(b)
	if v := d.Byte(); d.Err() == nil && v != 9 {
		d.Failf("version %d", v)
	}
	var r Ring[pair] // decoded aside, so p is unchanged on a later error
	r.DecodeState(d, func(d *Decoder) pair { return pair{d.Float64(), d.Varint()} })
	if err := d.Finish(); err != nil {
		return err
	}
	p.Ring = r
	return nil
}

func pairStep(s BinaryState, i int, x float64, out []uint64) []uint64 {
	r := s.(*pairRing)
	ev, ok := r.Push(pair{x, int64(i)})
	out = append(out, b2u(ok), math.Float64bits(ev.y), uint64(ev.t), uint64(r.Len()))
	for i, v := range r.All() {
		out = append(out, uint64(r.Slot(i)), math.Float64bits(v.y), uint64(v.t))
	}
	return out
}

func uniform(r *rand.Rand, _ int) float64 { return r.Float64() }

func TestStateContinuation(t *testing.T) {
	adw := func(o *ADWINOptions) func() BinaryState {
		return func() BinaryState { return NewADWINOptions(o) }
	}
	cases := []streamCase{
		{name: "ADWIN defaults", build: adw(nil), fresh: func() BinaryState { return new(ADWIN) },
			input: shifting(1500, 1), step: adwinStep, n: 8000, snaps: []int{0, 5, 31, 32, 1000, 4321}},
		{name: "ADWIN clock 1 M 2", build: adw(&ADWINOptions{Clock: 1, Buckets: 2, Delta: 0.05}),
			fresh: adw(nil), input: shifting(700, 1), step: adwinStep, n: 5000, snaps: []int{3, 100, 2500}},
		{name: "ADWIN M 1", build: adw(&ADWINOptions{Clock: 3, Buckets: 1}),
			fresh: func() BinaryState { return new(ADWIN) }, input: shifting(600, 1), step: adwinStep, n: 4000, snaps: []int{50}},
		{name: "ADWIN range 5", build: adw(&ADWINOptions{Range: 5, Buckets: 9, Clock: 7}),
			fresh: adw(&ADWINOptions{Buckets: 3}), input: shifting(2000, 5), step: adwinStep, n: 7000, snaps: []int{6, 3999}},
		{name: "PageHinkley defaults", build: func() BinaryState { return NewPageHinkley(nil) },
			fresh: func() BinaryState { return new(PageHinkley) }, input: shifting(400, 40), step: phStep, n: 5000, snaps: []int{0, 10, 29, 30}},
		{name: "PageHinkley classic", build: func() BinaryState {
			return NewPageHinkley(&PageHinkleyOptions{Alpha: 1, Threshold: 3, MinInstances: 10, Delta: 0.01})
		}, fresh: func() BinaryState { return NewPageHinkley(nil) }, input: shifting(300, 2), step: phStep, n: 4000, snaps: []int{9, 500}},
		{name: "Ring float64", build: func() BinaryState { return NewRing[float64](7) },
			fresh: func() BinaryState { return new(Ring[float64]) }, input: uniform, step: ringStep, n: 500, snaps: []int{0, 3, 17, 200}},
		{name: "Ring int", build: func() BinaryState { return NewRing[int](5) },
			fresh: func() BinaryState { return NewRing[int](2) }, input: uniform, step: ringIntStep, n: 300, snaps: []int{0, 2, 101}},
		{name: "Ring of a caller's type", build: func() BinaryState { return &pairRing{*NewRing[pair](6)} },
			fresh: func() BinaryState { return new(pairRing) }, input: uniform, step: pairStep, n: 300, snaps: []int{1, 4, 77}},
		{name: "Timed float64", build: func() BinaryState { return NewTimed[float64](9, 25) },
			fresh: func() BinaryState { return new(Timed[float64]) }, input: uniform, step: timedStep, n: 600, snaps: []int{0, 1, 50, 333}},
		{name: "Timed count only", build: func() BinaryState { return NewTimed[float64](4, 0) },
			fresh: func() BinaryState { return NewTimed[float64](100, 7) }, input: uniform, step: timedStep, n: 300, snaps: []int{2, 150}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { runContinuation(t, c) })
	}
}

// TestStateFreshValues: a value straight from its constructor, and
// PageHinkley just after a signal, round-trip too.
func TestStateFreshValues(t *testing.T) {
	ph := NewPageHinkley(&PageHinkleyOptions{Threshold: 1, MinInstances: 1})
	for i := 0; !ph.Add(float64(i)); i++ {
	}
	for name, v := range map[string]BinaryState{
		"ADWIN": NewADWIN(0), "PageHinkley": NewPageHinkley(nil), "PageHinkley fired": ph,
		"Ring": NewRing[int64](3), "Timed": NewTimed[uint64](2, 1), "ShiftReference zero": new(ShiftReference),
		"ShiftReference empty": NewShiftReference(nil, 4),
	} {
		b, err := v.MarshalBinary()
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		fresh := map[string]BinaryState{"ADWIN": new(ADWIN), "PageHinkley": new(PageHinkley),
			"PageHinkley fired": new(PageHinkley), "Ring": new(Ring[int64]), "Timed": new(Timed[uint64]),
			"ShiftReference zero": new(ShiftReference), "ShiftReference empty": new(ShiftReference)}[name]
		if err := fresh.UnmarshalBinary(b); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if b2, _ := fresh.MarshalBinary(); !bytes.Equal(b, b2) {
			t.Errorf("%s: round trip changed the state", name)
		}
	}
}

// TestStateUnbuilt: values not made by a constructor cannot be saved.
func TestStateUnbuilt(t *testing.T) {
	for name, v := range map[string]BinaryState{
		"ADWIN": new(ADWIN), "PageHinkley": new(PageHinkley), "Ring": new(Ring[float64]),
		"Timed": new(Timed[int]),
	} {
		if _, err := v.MarshalBinary(); !errors.Is(err, ErrState) {
			t.Errorf("%s: MarshalBinary of the zero value: %v, want ErrState", name, err)
		}
	}
	if _, err := NewADWINOptions(&ADWINOptions{Buckets: 5000}).MarshalBinary(); !errors.Is(err, ErrState) {
		t.Errorf("ADWIN with 5000 buckets: %v, want ErrState", err)
	}
	if _, err := NewRing[string](2).MarshalBinary(); !errors.Is(err, ErrState) {
		t.Errorf("Ring[string]: %v, want ErrState", err)
	}
	if err := new(Timed[string]).UnmarshalBinary([]byte{1}); !errors.Is(err, ErrState) {
		t.Errorf("Timed[string]: %v, want ErrState", err)
	}
}

// shiftColumns returns d columns of varied shape: normal, with NaNs and
// infinities, tied, constant, empty.
func shiftColumns(r *rand.Rand, d, n int, shift float64) [][]float64 {
	cols := make([][]float64, d)
	for j := range cols {
		col := make([]float64, n+j)
		for i := range col {
			switch j % 5 {
			case 0:
				col[i] = shift + r.NormFloat64()
			case 1:
				col[i] = []float64{math.NaN(), math.Inf(1), shift + r.ExpFloat64()}[r.IntN(3)]
			case 2:
				col[i] = float64(r.IntN(3)) + shift
			case 3:
				col[i] = 4
			}
		}
		if j%5 == 4 {
			col = nil
		}
		cols[j] = col
	}
	return cols
}

func TestShiftReferenceState(t *testing.T) {
	for _, c := range []struct {
		name    string
		d, bins int
		fresh   func() *ShiftReference
	}{
		{"defaults", 7, 0, func() *ShiftReference { return new(ShiftReference) }},
		{"one bin", 5, 1, func() *ShiftReference { return NewShiftReference([][]float64{{1, 2}}, 3) }},
		{"many bins", 11, 37, func() *ShiftReference { return new(ShiftReference) }},
		{"no features", 0, 5, func() *ShiftReference { return new(ShiftReference) }},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := rand.New(rand.NewPCG(3, uint64(c.d)))
			ref := NewShiftReference(shiftColumns(r, c.d, 200, 0), c.bins)
			b, err := ref.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			got := c.fresh()
			if err := got.UnmarshalBinary(b); err != nil {
				t.Fatal(err)
			}
			if got.Features() != ref.Features() || got.Bins() != ref.Bins() {
				t.Fatalf("restored %d features × %d bins, want %d × %d", got.Features(), got.Bins(), ref.Features(), ref.Bins())
			}
			for j := range ref.Features() {
				if got.Count(j) != ref.Count(j) || !sameBits(got.Mean(j), ref.Mean(j)) || !sameBits(got.Std(j), ref.Std(j)) ||
					!slices.EqualFunc(got.Edges(j), ref.Edges(j), sameBits) ||
					!slices.EqualFunc(got.Fractions(j), ref.Fractions(j), sameBits) {
					t.Fatalf("feature %d differs after restore", j)
				}
			}
			var want, have []FeatureShift
			for k := range 30 {
				cols := shiftColumns(r, c.d, 50+k, float64(k)/10)
				want, have = ref.Compare(cols, want), got.Compare(cols, have)
				if !slices.EqualFunc(want, have, func(a, b FeatureShift) bool {
					return a.Feature == b.Feature && sameBits(a.MeanShift, b.MeanShift) && sameBits(a.PSI, b.PSI)
				}) {
					t.Fatalf("sample %d: Compare %v, want %v", k, have, want)
				}
			}
		})
	}
}

func sameBits(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }

// validStates returns encodings of every type, each with a target to
// decode it into.
func validStates(t testing.TB) []stateSample {
	t.Helper()
	r := rand.New(rand.NewPCG(5, 5))
	a := NewADWINOptions(&ADWINOptions{Clock: 1, Buckets: 2})
	ph := NewPageHinkley(nil)
	ring, timed := NewRing[float64](4), NewTimed[int](5, 10)
	for i := range 300 {
		x := shifting(100, 1)(r, i)
		a.Add(x)
		ph.Add(50 * x)
		ring.Push(x)
		timed.Push(int64(i), i, nil)
	}
	pr := &pairRing{*NewRing[pair](3)}
	pr.Push(pair{1.5, -3})
	var out []stateSample
	add := func(name string, v BinaryState, fresh func() BinaryState) {
		b, err := v.MarshalBinary()
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		out = append(out, stateSample{name, b, fresh})
	}
	add("ADWIN", a, func() BinaryState { return new(ADWIN) })
	add("ADWIN new", NewADWIN(0), func() BinaryState { return NewADWIN(0.3) })
	add("PageHinkley", ph, func() BinaryState { return new(PageHinkley) })
	add("ShiftReference", NewShiftReference(shiftColumns(r, 5, 20, 0), 3), func() BinaryState { return new(ShiftReference) })
	add("Ring", ring, func() BinaryState { return new(Ring[float64]) })
	add("Timed", timed, func() BinaryState { return new(Timed[int]) })
	add("Ring of a caller's type", pr, func() BinaryState { return new(pairRing) })
	return out
}

type stateSample struct {
	name  string
	b     []byte
	fresh func() BinaryState
}

// refuse checks that b is refused with ErrState and leaves the target as
// it was.
func refuse(t *testing.T, s stateSample, b []byte, what string) {
	t.Helper()
	y := s.fresh()
	before, _ := y.MarshalBinary()
	err := y.UnmarshalBinary(b)
	if !errors.Is(err, ErrState) {
		t.Fatalf("%s: %s: %v, want ErrState", s.name, what, err)
	}
	if after, _ := y.MarshalBinary(); !bytes.Equal(before, after) {
		t.Fatalf("%s: %s: a refused state changed the target", s.name, what)
	}
}

func TestStateRefusesDamage(t *testing.T) {
	for _, s := range validStates(t) {
		t.Run(s.name, func(t *testing.T) {
			for n := range len(s.b) {
				refuse(t, s, s.b[:n], fmt.Sprintf("prefix of %d/%d bytes", n, len(s.b)))
			}
			refuse(t, s, append(slices.Clip(s.b), 0), "trailing byte")
			for i, what := range []string{"version", "type tag"} {
				if s.name == "Ring of a caller's type" && i == 1 {
					continue // the caller's format has no tag
				}
				bad := slices.Clone(s.b)
				bad[i]++
				refuse(t, s, bad, what)
			}
		})
	}
}

// enc builds a hand-made state.
func enc(tag byte, f func(e *Encoder)) []byte {
	e := NewEncoder(nil)
	e.header(tag)
	f(e)
	return e.Bytes()
}

// adwinState writes an ADWIN state with the given fields: δ, M, clock,
// width, tick, rows and the bucket counts (sums 1, deviations 0).
func adwinState(delta float64, m, clock, width, tick int, cnt ...int) []byte {
	return enc(tagADWIN, func(e *Encoder) {
		e.PutFloat64(delta)
		e.PutUvarint(uint64(m))
		e.PutUvarint(uint64(clock))
		e.PutFloat64(1)
		e.PutUvarint(uint64(width))
		e.PutFloat64(0)
		e.PutFloat64(0)
		e.PutUvarint(uint64(tick))
		e.PutUvarint(0)
		e.PutUvarint(uint64(len(cnt)))
		for _, c := range cnt {
			e.PutUvarint(uint64(c))
			for range c {
				e.PutFloat64(1)
				e.PutFloat64(0)
			}
		}
	})
}

func TestStateRefusesImpossible(t *testing.T) {
	ring := func(kind byte, c, head, n int, vals ...float64) []byte {
		return enc(tagRing, func(e *Encoder) {
			e.PutByte(kind)
			e.PutUvarint(uint64(c))
			e.PutUvarint(uint64(head))
			e.PutUvarint(uint64(n))
			for _, v := range vals {
				e.PutFloat64(v)
			}
		})
	}
	timed := func(span, latest, stamp int64) []byte {
		return enc(tagTimed, func(e *Encoder) {
			e.PutByte(kindFloat64)
			e.PutVarint(span)
			e.PutVarint(latest)
			e.PutUvarint(2)
			e.PutUvarint(0)
			e.PutUvarint(1)
			e.PutVarint(stamp)
			e.PutFloat64(1)
		})
	}
	shift := func(bins, features int) []byte {
		return enc(tagShift, func(e *Encoder) {
			e.PutUvarint(uint64(bins))
			e.PutUvarint(uint64(features))
			if features == 0 {
				return
			}
			e.PutUvarint(1)
			for range 2*bins + 1 { // mean, std, edges, fractions of one feature
				e.PutFloat64(0.5)
			}
		})
	}
	ph := func(alpha float64, minN, n int, fired byte) []byte {
		return enc(tagPageHinkley, func(e *Encoder) {
			e.PutFloat64(0.005)
			e.PutFloat64(50)
			e.PutFloat64(alpha)
			e.PutUvarint(uint64(minN))
			e.PutUvarint(uint64(n))
			e.PutFloat64(0)
			e.PutFloat64(0)
			e.PutByte(fired)
		})
	}
	newADWIN := func() BinaryState { return new(ADWIN) }
	newPH := func() BinaryState { return new(PageHinkley) }
	newRing := func() BinaryState { return new(Ring[float64]) }
	newTimed := func() BinaryState { return new(Timed[float64]) }
	newShift := func() BinaryState { return new(ShiftReference) }
	good := []stateSample{
		{"ADWIN control", adwinState(0.01, 2, 4, 5, 3, 1, 2), newADWIN},
		{"PageHinkley control", ph(1, 3, 3, 1), newPH},
		{"Ring control", ring(kindFloat64, 3, 2, 2, 1, 2), newRing},
		{"Timed control", timed(5, 7, 7), newTimed},
		{"ShiftReference control", shift(2, 1), newShift},
	}
	for _, s := range good {
		if err := s.fresh().UnmarshalBinary(s.b); err != nil {
			t.Fatalf("%s: %v (the hand-made states are wrong)", s.name, err)
		}
	}
	for _, s := range []stateSample{
		{"ADWIN delta 1.5", adwinState(1.5, 2, 4, 0, 0), newADWIN},
		{"ADWIN delta NaN", adwinState(math.NaN(), 2, 4, 0, 0), newADWIN},
		{"ADWIN M 0", adwinState(0.01, 0, 4, 0, 0), newADWIN},
		{"ADWIN M 1<<20", adwinState(0.01, 1<<20, 4, 0, 0), newADWIN},
		{"ADWIN clock 0", adwinState(0.01, 2, 0, 0, 0), newADWIN},
		{"ADWIN tick = clock", adwinState(0.01, 2, 4, 5, 4, 1, 2), newADWIN},
		{"ADWIN row beyond M", adwinState(0.01, 2, 4, 3, 0, 3), newADWIN},
		{"ADWIN width mismatch", adwinState(0.01, 2, 4, 6, 0, 1, 2), newADWIN},
		{"ADWIN empty top row", adwinState(0.01, 2, 4, 1, 0, 1, 0), newADWIN},
		{"ADWIN 65 rows", adwinState(0.01, 2, 4, 0, 0, make([]int, 65)...), newADWIN},
		{"ADWIN row 63 used", adwinState(0.01, 2, 4, 0, 0, append(make([]int, 63), 1)...), newADWIN},
		{"PageHinkley alpha 0", ph(0, 3, 3, 0), newPH},
		{"PageHinkley min instances 0", ph(1, 0, 3, 0), newPH},
		{"PageHinkley fired too early", ph(1, 3, 2, 1), newPH},
		{"PageHinkley bool 2", ph(1, 3, 3, 2), newPH},
		{"Ring capacity 0", ring(kindFloat64, 0, 0, 0), newRing},
		{"Ring capacity 1<<30", ring(kindFloat64, 1<<30, 0, 0), newRing},
		{"Ring head = capacity", ring(kindFloat64, 3, 3, 0), newRing},
		{"Ring length > capacity", ring(kindFloat64, 3, 0, 4, 1, 2, 3, 4), newRing},
		{"Ring of another kind", ring(kindInt64, 3, 0, 0), newRing},
		{"Timed negative span", timed(-1, 7, 7), newTimed},
		{"Timed stamp after latest", timed(5, 7, 8), newTimed},
		{"ShiftReference features 1<<40", shift(2, 1<<40), newShift},
		{"ShiftReference features beyond data", shift(2, 2), newShift},
		{"ShiftReference bins 0 with features", shift(0, 1), newShift},
		{"ShiftReference bins 1<<30", shift(1<<30, 0), newShift},
	} {
		refuse(t, s, s.b, "impossible value")
	}
}

func TestDecoderHelpers(t *testing.T) {
	e := NewEncoder([]byte{0xee})
	e.PutFloat64s([]float64{1, math.Float64frombits(0x7ff8_dead_beef_0001), -0})
	e.PutVarint(math.MinInt64)
	e.PutBlob([]byte("abc"))
	e.PutBool(true)
	d := NewDecoder(e.Bytes())
	if d.Byte() != 0xee {
		t.Fatal("prefix byte lost")
	}
	xs := d.Float64s()
	if len(xs) != 3 || math.Float64bits(xs[1]) != 0x7ff8_dead_beef_0001 {
		t.Fatalf("Float64s = %v: NaN payload lost", xs)
	}
	if v := d.Varint(); v != math.MinInt64 {
		t.Fatalf("Varint = %d", v)
	}
	if b := d.Blob(); string(b) != "abc" || !d.Bool() {
		t.Fatalf("Blob = %q", b)
	}
	if err := d.Finish(); err != nil {
		t.Fatal(err)
	}

	into := make([]float64, 2)
	d = NewDecoder(e.Bytes()[1:])
	d.Float64sInto(into)
	if !errors.Is(d.Err(), ErrState) {
		t.Errorf("Float64sInto of the wrong length: %v", d.Err())
	}
	d = NewDecoder([]byte{0xff, 0xff, 0xff, 0xff, 0x0f}) // length 2^32−1, no data
	if xs := d.Float64s(); xs != nil || !errors.Is(d.Err(), ErrState) {
		t.Errorf("Float64s with a length beyond the data: %v, %v", xs, d.Err())
	}
	if d.Uvarint() != 0 || d.Float64() != 0 || d.Err() == nil {
		t.Error("reads after an error must return zero values and keep the error")
	}
}
