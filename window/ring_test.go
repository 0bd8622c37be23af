package window

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"
)

// checkRing compares every accessor of r against the reference slice want
// (oldest first).
func checkRing(t *testing.T, r *Ring[int], want []int) {
	t.Helper()
	if r.Len() != len(want) {
		t.Fatalf("Len = %d, want %d", r.Len(), len(want))
	}
	for i, w := range want {
		if got := r.At(i); got != w {
			t.Fatalf("At(%d) = %d, want %d", i, got, w)
		}
	}
	var got []int
	for i, v := range r.All() {
		if i != len(got) {
			t.Fatalf("All yielded index %d, want %d", i, len(got))
		}
		got = append(got, v)
	}
	if !slices.Equal(got, want) {
		t.Fatalf("All = %v, want %v", got, want)
	}
	o, ok := r.Oldest()
	n, okN := r.Newest()
	if ok != (len(want) > 0) || okN != ok {
		t.Fatalf("Oldest/Newest ok = %v/%v with Len %d", ok, okN, len(want))
	}
	if ok && (o != want[0] || n != want[len(want)-1]) {
		t.Fatalf("Oldest, Newest = %d, %d, want %d, %d", o, n, want[0], want[len(want)-1])
	}
}

func TestRingAgainstSlice(t *testing.T) {
	tests := []struct {
		name string
		cap  int
		pop  float64 // probability of PopOldest instead of Push
		ops  int
	}{
		{"cap1", 1, 0.1, 50},
		{"cap2", 2, 0.3, 200},
		{"cap7-push-only", 7, 0, 100},
		{"cap7-mixed", 7, 0.4, 500},
		{"cap64-mixed", 64, 0.2, 2000},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1, uint64(tc.cap)))
			r := NewRing[int](tc.cap)
			if r.Cap() != tc.cap {
				t.Fatalf("Cap = %d, want %d", r.Cap(), tc.cap)
			}
			var want []int
			for op := 0; op < tc.ops; op++ {
				if rng.Float64() < tc.pop {
					v, ok := r.PopOldest()
					if ok != (len(want) > 0) {
						t.Fatalf("PopOldest ok = %v with %d values", ok, len(want))
					}
					if ok {
						if v != want[0] {
							t.Fatalf("PopOldest = %d, want %d", v, want[0])
						}
						want = want[1:]
					}
				} else {
					ev, full := r.Push(op)
					wantFull := len(want) == tc.cap
					if full != wantFull {
						t.Fatalf("op %d: Push full = %v, want %v", op, full, wantFull)
					}
					if full {
						if ev != want[0] {
							t.Fatalf("op %d: evicted %d, want %d", op, ev, want[0])
						}
						want = want[1:]
					} else if ev != 0 {
						t.Fatalf("op %d: evicted %d on a non-full ring, want zero", op, ev)
					}
					want = append(want, op)
				}
				checkRing(t, r, want)
			}
			r.Reset()
			checkRing(t, r, nil)
		})
	}
}

// TestRingSlotStable checks that a value keeps its physical slot while it
// lives, so side arrays indexed by slot stay aligned.
func TestRingSlotStable(t *testing.T) {
	const c = 5
	r := NewRing[int](c)
	side := make([]int, c) // side[slot] mirrors the value in that slot
	for v := 0; v < 23; v++ {
		r.Push(v)
		side[r.Slot(r.Len()-1)] = v
		if v%4 == 3 {
			r.PopOldest()
		}
		for i := range r.Len() {
			s := r.Slot(i)
			if s < 0 || s >= c {
				t.Fatalf("Slot(%d) = %d outside [0,%d)", i, s, c)
			}
			if side[s] != r.At(i) {
				t.Fatalf("after %d: slot %d holds %d in the side array, ring has %d", v, s, side[s], r.At(i))
			}
		}
	}
}

func TestRingPanics(t *testing.T) {
	tests := []struct {
		name string
		f    func()
	}{
		{"capacity 0", func() { NewRing[int](0) }},
		{"capacity -1", func() { NewRing[int](-1) }},
		{"At on empty", func() { NewRing[int](3).At(0) }},
		{"At negative", func() { r := NewRing[int](3); r.Push(1); r.At(-1) }},
		{"At past Len", func() { r := NewRing[int](3); r.Push(1); r.At(1) }},
		{"Slot past Len", func() { r := NewRing[int](3); r.Push(1); r.Slot(1) }},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Fatal("no panic")
				}
			}()
			tc.f()
		})
	}
}

// TestRingClearsReferences checks that PopOldest and Reset drop the ring's
// reference to removed values (so the garbage collector can free them).
func TestRingClearsReferences(t *testing.T) {
	r := NewRing[*int](2)
	a, b := new(int), new(int)
	r.Push(a)
	r.Push(b)
	r.PopOldest()
	if r.buf[0] != nil {
		t.Fatal("PopOldest left a reference in its slot")
	}
	r.Reset()
	if r.buf[1] != nil {
		t.Fatal("Reset left a reference")
	}
}

func TestRingAllEarlyStop(t *testing.T) {
	r := NewRing[int](4)
	for v := range 6 {
		r.Push(v)
	}
	var got []int
	for _, v := range r.All() {
		got = append(got, v)
		if len(got) == 2 {
			break
		}
	}
	if !slices.Equal(got, []int{2, 3}) {
		t.Fatalf("got %v, want [2 3]", got)
	}
}

func TestRingPushAllocs(t *testing.T) {
	r := NewRing[[3]float64](128)
	var v [3]float64
	allocs := testing.AllocsPerRun(1000, func() {
		v[0]++
		r.Push(v)
	})
	if allocs != 0 {
		t.Fatalf("Push allocates %v times per call, want 0", allocs)
	}
}

func BenchmarkRingPush(b *testing.B) {
	for _, c := range []int{16, 1024, 1 << 16} {
		b.Run(fmt.Sprint("cap=", c), func(b *testing.B) {
			r := NewRing[float64](c)
			b.ReportAllocs()
			for i := 0; b.Loop(); i++ {
				r.Push(float64(i))
			}
		})
	}
}

func ExampleRing() {
	r := NewRing[string](3)
	for _, s := range []string{"a", "b", "c", "d"} {
		if old, full := r.Push(s); full {
			fmt.Println("evicted", old)
		}
	}
	for i, s := range r.All() {
		fmt.Println(i, s)
	}
	newest, _ := r.Newest()
	fmt.Println("len", r.Len(), "newest", newest)
	// Output:
	// evicted a
	// 0 b
	// 1 c
	// 2 d
	// len 3 newest d
}
