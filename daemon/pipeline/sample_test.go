package pipeline

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"lariat/window"
)

// TestFeatureSampleCompare checks that the incremental comparison of the
// data sample gives window.ShiftReference.Compare's result bit for bit, on
// columns with missing values, infinities, ties, a constant column and a
// column that is all missing, across reference re-takes and wrap-arounds
// of the ring.
func TestFeatureSampleCompare(t *testing.T) {
	const d, n = 6, 257
	cases := []struct {
		name  string
		shift float64 // added to feature 0 after the reference
	}{
		{"stationary", 0},
		{"shifted", 1.5},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(7, 8))
			s := newFeatureSample(d, n)
			x := make([]float64, d)
			gen := func(shift float64) {
				x[0] = rng.NormFloat64() + shift
				x[1] = math.Round(rng.NormFloat64() * 2) // ties
				x[2] = 3                                 // constant
				x[3] = math.NaN()                        // never present
				x[4] = rng.ExpFloat64()
				x[5] = rng.NormFloat64()
				switch rng.IntN(10) {
				case 0:
					x[4] = math.NaN()
				case 1:
					x[5] = math.Inf(1 - 2*rng.IntN(2))
				}
				s.push(x[:d-rng.IntN(2)], 0) // a short vector: the rest is missing
			}
			var got, want []window.FeatureShift
			for round := range 4 {
				for range n + rng.IntN(n) {
					gen(0)
				}
				ref := s.reference()
				if want := window.NewShiftReference(s.columns(), 0); !sameReference(ref, want) {
					t.Fatalf("round %d: reference differs from one built on the columns", round)
				}
				for step := range 3 {
					for range n/2 + rng.IntN(n) {
						gen(tc.shift * float64(step))
					}
					got = s.compare(got)
					want = ref.Compare(s.columns(), want)
					if err := sameShifts(got, want); err != nil {
						t.Fatalf("round %d, step %d: %v", round, step, err)
					}
				}
			}
			if tc.shift > 0 && !(want[0].PSI > 0.25) {
				t.Errorf("shift of %v sd gave PSI %v: the test does not exercise a shift", tc.shift, want[0].PSI)
			}
		})
	}
}

// TestFeatureSampleBins checks the branch-free bin count against window's
// binary search (the rule of window.ShiftReference) on ascending edges
// with ties, on values equal to an edge, on −0 against a +0 edge and on the
// extremes of float64.
func TestFeatureSampleBins(t *testing.T) {
	edges := [][]float64{
		{},
		{0},
		{-1, 0, 0, 0, 2.5, 7},
		{1, 1, 1, 1, 1, 1, 1, 1, 1},
		{-3, -2, -1, 0, 1, 2, 3, 4, 5},
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for i, e := range edges {
		vals := append([]float64{-math.MaxFloat64, math.MaxFloat64, math.SmallestNonzeroFloat64, math.Copysign(0, -1)}, e...)
		for range 200 {
			vals = append(vals, math.Round(rng.NormFloat64()*40)/8)
		}
		for _, v := range vals {
			want := window.Bin(e, v)
			if got := countLE(e, v); got != want {
				t.Errorf("edges %d %v: bin of %v is %d, want %d", i, e, v, got, want)
			}
			if len(e) == 9 {
				if got := countLE9((*[9]float64)(e), v); got != want {
					t.Errorf("edges %d %v: unrolled bin of %v is %d, want %d", i, e, v, got, want)
				}
			}
		}
	}
}

// TestFeatureSampleAllocs: pushing into the sample and comparing it
// allocate nothing once the reference is set.
func TestFeatureSampleAllocs(t *testing.T) {
	s := newFeatureSample(8, 100)
	x := make([]float64, 8)
	rng := rand.New(rand.NewPCG(1, 1))
	fill := func() {
		for j := range x {
			x[j] = rng.NormFloat64()
		}
	}
	for range 100 {
		fill()
		s.push(x, 0)
	}
	s.reference()
	shifts := s.compare(nil)
	allocs := testing.AllocsPerRun(500, func() {
		fill()
		s.push(x, 1)
		shifts = s.compare(shifts)
	})
	if allocs != 0 {
		t.Errorf("%v allocations per push and compare, want 0", allocs)
	}
}

// sameReference reports whether two references agree bit for bit.
func sameReference(a, b *window.ShiftReference) bool {
	if a.Features() != b.Features() || a.Bins() != b.Bins() {
		return false
	}
	for j := range a.Features() {
		if a.Count(j) != b.Count(j) || !sameFloat(a.Mean(j), b.Mean(j)) || !sameFloat(a.Std(j), b.Std(j)) {
			return false
		}
		for i, e := range a.Edges(j) {
			if !sameFloat(e, b.Edges(j)[i]) {
				return false
			}
		}
		for i, f := range a.Fractions(j) {
			if !sameFloat(f, b.Fractions(j)[i]) {
				return false
			}
		}
	}
	return true
}

// sameShifts returns an error naming the first shift that differs in a bit.
func sameShifts(got, want []window.FeatureShift) error {
	if len(got) != len(want) {
		return fmt.Errorf("%d shifts, want %d", len(got), len(want))
	}
	for i := range got {
		g, w := got[i], want[i]
		if g.Feature != w.Feature || !sameFloat(g.MeanShift, w.MeanShift) || !sameFloat(g.PSI, w.PSI) {
			return fmt.Errorf("feature %d: got %+v, want %+v", i, g, w)
		}
	}
	return nil
}

func sameFloat(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }

// BenchmarkFeatureSamplePush measures one push (copy and bin update) into
// a sample of 1000 records with a reference set.
func BenchmarkFeatureSamplePush(b *testing.B) {
	for _, d := range []int{32, 256} {
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			s := newFeatureSample(d, 1000)
			rng := rand.New(rand.NewPCG(1, 1))
			xs := make([][]float64, 1024)
			for i := range xs {
				xs[i] = make([]float64, d)
				for j := range xs[i] {
					xs[i][j] = rng.NormFloat64()
				}
			}
			for i := range 1000 {
				s.push(xs[i&1023], 0)
			}
			s.reference()
			b.ReportAllocs()
			b.ResetTimer()
			for i := range b.N {
				s.push(xs[i&1023], 0)
			}
		})
	}
}

// BenchmarkFeatureSampleCompare measures one comparison of a sample of 1000
// records against its reference, and window.ShiftReference.Compare on the
// same columns.
func BenchmarkFeatureSampleCompare(b *testing.B) {
	for _, d := range []int{32, 256} {
		s := newFeatureSample(d, 1000)
		rng := rand.New(rand.NewPCG(1, 1))
		x := make([]float64, d)
		for range 2000 {
			for j := range x {
				x[j] = rng.NormFloat64()
			}
			s.push(x, 0)
		}
		ref := s.reference()
		b.Run(fmt.Sprintf("d=%d/incremental", d), func(b *testing.B) {
			shifts := s.compare(nil)
			for range b.N {
				shifts = s.compare(shifts)
			}
		})
		b.Run(fmt.Sprintf("d=%d/window", d), func(b *testing.B) {
			cols := s.columns()
			shifts := ref.Compare(cols, nil)
			for range b.N {
				shifts = ref.Compare(cols, shifts)
			}
		})
	}
}
