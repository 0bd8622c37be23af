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

// fuzzState checks that any input is refused with ErrState or accepted,
// and that an accepted state re-marshals to a state that decodes again
// and survives use.
func fuzzState(f *testing.F, name string, fresh func() BinaryState, use func(BinaryState)) {
	for _, s := range validStates(f) {
		if s.name == name {
			f.Add(s.b)
			f.Add(s.b[:len(s.b)/2])
		}
	}
	f.Add([]byte{})
	f.Add([]byte{StateVersion})
	f.Fuzz(func(t *testing.T, b []byte) {
		x := fresh()
		if err := x.UnmarshalBinary(b); err != nil {
			if !errors.Is(err, ErrState) {
				t.Fatalf("error %v does not wrap ErrState", err)
			}
			return
		}
		b2, err := x.MarshalBinary()
		if err != nil {
			t.Fatalf("accepted state does not marshal: %v", err)
		}
		y := fresh()
		if err := y.UnmarshalBinary(b2); err != nil {
			t.Fatalf("re-marshaled state refused: %v", err)
		}
		if b3, _ := y.MarshalBinary(); !bytes.Equal(b2, b3) {
			t.Fatal("re-marshaled state is not stable")
		}
		use(x)
	})
}

func FuzzADWINState(f *testing.F) {
	fuzzState(f, "ADWIN", func() BinaryState { return new(ADWIN) }, func(s BinaryState) {
		a := s.(*ADWIN)
		for i := range 200 {
			a.Add(float64(i%7) / 7)
		}
	})
}

func FuzzPageHinkleyState(f *testing.F) {
	fuzzState(f, "PageHinkley", func() BinaryState { return new(PageHinkley) }, func(s BinaryState) {
		for i := range 50 {
			s.(*PageHinkley).Add(float64(i))
		}
	})
}

func FuzzShiftReferenceState(f *testing.F) {
	fuzzState(f, "ShiftReference", func() BinaryState { return new(ShiftReference) }, func(s BinaryState) {
		r := s.(*ShiftReference)
		r.Compare(make([][]float64, r.Features()), nil)
		r.Compare(slices.Repeat([][]float64{{1, 2, math.NaN()}}, r.Features()), nil)
	})
}

func FuzzRingState(f *testing.F) {
	fuzzState(f, "Ring", func() BinaryState { return new(Ring[float64]) }, func(s BinaryState) {
		r := s.(*Ring[float64])
		for i := range 2 * r.Cap() {
			r.Push(float64(i))
			r.PopOldest()
			r.Push(float64(i))
		}
	})
}

func FuzzTimedState(f *testing.F) {
	fuzzState(f, "Timed", func() BinaryState { return new(Timed[int]) }, func(s BinaryState) {
		w := s.(*Timed[int])
		for i := range 2 * w.Cap() {
			w.Push(int64(i), i, nil)
		}
	})
}

func BenchmarkADWINMarshal(b *testing.B) {
	for _, n := range []int{100, 10_000, 1_000_000} {
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			a := NewADWIN(0)
			r := rand.New(rand.NewPCG(1, 1))
			for range n {
				a.Add(r.Float64())
			}
			var buf []byte
			b.ReportAllocs()
			for b.Loop() {
				buf, _ = a.AppendBinary(buf[:0])
			}
			b.SetBytes(int64(len(buf)))
		})
	}
}

// A detector saved in the middle of a stream and restored elsewhere goes
// on exactly as the original.
func ExampleADWIN_MarshalBinary() {
	a := NewADWIN(0.002)
	r := rand.New(rand.NewPCG(1, 2))
	for range 1000 {
		a.Add(0.2 + 0.1*r.Float64())
	}
	saved, err := a.MarshalBinary()
	if err != nil {
		fmt.Println(err)
		return
	}
	var b ADWIN
	if err := b.UnmarshalBinary(saved); err != nil {
		fmt.Println(err)
		return
	}
	same := true
	for i := range 1000 {
		x := 0.7 + 0.1*r.Float64()
		if a.Add(x) != b.Add(x) || a.Mean() != b.Mean() {
			same = false
			fmt.Println("diverged at", i)
		}
	}
	fmt.Println(len(saved) < 1000, same, a.Width() == b.Width(), a.Width() < 2000)
	fmt.Println(errors.Is(b.UnmarshalBinary(saved[:10]), ErrState))
	// Output:
	// true true true true
	// true
}
