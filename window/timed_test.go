package window

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

type stamped struct {
	t int64
	v int
}

// refTimed is the obvious slice implementation of Timed's rules.
type refTimed struct {
	cap    int
	span   int64
	latest int64
	vals   []stamped
}

func (r *refTimed) push(t int64, v int) (evicted []int) {
	if t > r.latest {
		r.latest = t
	}
	if r.span > 0 {
		evicted = r.evictOlder(r.latest - r.span)
	}
	if len(r.vals) == r.cap {
		evicted = append(evicted, r.vals[0].v)
		r.vals = r.vals[1:]
	}
	r.vals = append(r.vals, stamped{t, v})
	return evicted
}

func (r *refTimed) evictOlder(cutoff int64) (evicted []int) {
	for len(r.vals) > 0 && r.vals[0].t < cutoff {
		evicted = append(evicted, r.vals[0].v)
		r.vals = r.vals[1:]
	}
	return evicted
}

// TestTimedAgainstReference drives Timed and refTimed, a naive slice
// implementation of the same rules (span eviction against the latest stamp,
// then the count cap, oldest first), with random stamps, late stamps and
// explicit cutoffs, and compares every eviction, length and element. Source:
// first-in-first-out eviction by count and by age is common practice, no
// single source; the reference is written independently in this file.
func TestTimedAgainstReference(t *testing.T) {
	tests := []struct {
		name     string
		cap      int
		span     int64
		late     float64 // probability a stamp goes backwards
		maxStep  int64   // stamps advance by up to this many ms
		evictCut float64 // probability of an explicit EvictOlder call
	}{
		{"count-only", 8, 0, 0, 10, 0},
		{"span-binds", 1000, 50, 0, 10, 0},
		{"both-bind", 12, 60, 0, 10, 0},
		{"late-stamps", 20, 40, 0.2, 10, 0},
		{"explicit-cutoffs", 20, 0, 0.1, 10, 0.1},
		{"same-stamp", 5, 1, 0, 0, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(7, uint64(tc.cap)))
			w := NewTimed[int](tc.cap, tc.span)
			ref := &refTimed{cap: tc.cap, span: tc.span, latest: math.MinInt64}
			side := make([]int, tc.cap) // side[slot] = value, checked on eviction
			var got []int
			record := func(slot, v int) {
				if side[slot] != v {
					t.Fatalf("evicted %d from slot %d, side array holds %d", v, slot, side[slot])
				}
				got = append(got, v)
			}
			now := int64(1_700_000_000_000)
			for v := 1; v <= 3000; v++ {
				now += rng.Int64N(tc.maxStep + 1)
				ts := now
				if rng.Float64() < tc.late {
					ts -= rng.Int64N(100)
				}
				got = got[:0]
				if rng.Float64() < tc.evictCut {
					cut := now - rng.Int64N(80)
					want := ref.evictOlder(cut)
					if n := w.EvictOlder(cut, record); n != len(want) {
						t.Fatalf("EvictOlder returned %d, want %d", n, len(want))
					}
					if !slices.Equal(got, want) {
						t.Fatalf("EvictOlder evicted %v, want %v", got, want)
					}
					got = got[:0]
				}
				want := ref.push(ts, v)
				slot := w.Push(ts, v, record)
				side[slot] = v
				if !slices.Equal(got, want) {
					t.Fatalf("push %d: evicted %v, want %v", v, got, want)
				}
				if w.Len() != len(ref.vals) || w.Latest() != ref.latest {
					t.Fatalf("Len, Latest = %d, %d, want %d, %d", w.Len(), w.Latest(), len(ref.vals), ref.latest)
				}
				for i, s := range ref.vals {
					if w.At(i) != s.v || w.Stamp(i) != s.t || side[w.Slot(i)] != s.v {
						t.Fatalf("index %d: (%d,%d), want (%d,%d)", i, w.Stamp(i), w.At(i), s.t, s.v)
					}
				}
			}
		})
	}
}

func TestTimedKeepNewestAndReset(t *testing.T) {
	w := NewTimed[int](10, 0)
	for v := range 10 {
		w.Push(int64(v), v, nil)
	}
	var got []int
	n := w.KeepNewest(3, func(_ int, v int) { got = append(got, v) })
	if n != 7 || !slices.Equal(got, []int{0, 1, 2, 3, 4, 5, 6}) || w.Len() != 3 || w.At(0) != 7 {
		t.Fatalf("KeepNewest(3) = %d evicting %v, Len %d", n, got, w.Len())
	}
	if n := w.KeepNewest(5, nil); n != 0 {
		t.Fatalf("KeepNewest above Len evicted %d", n)
	}
	if n := w.KeepNewest(-1, nil); n != 3 || w.Len() != 0 {
		t.Fatalf("KeepNewest(-1) evicted %d, Len %d", n, w.Len())
	}
	w.Push(42, 1, nil)
	w.Reset()
	if w.Len() != 0 || w.Latest() != math.MinInt64 {
		t.Fatalf("after Reset: Len %d, Latest %d", w.Len(), w.Latest())
	}
}

// TestTimedExtremeStamps checks that the cutoff does not overflow.
func TestTimedExtremeStamps(t *testing.T) {
	w := NewTimed[int](4, math.MaxInt64)
	w.Push(math.MinInt64, 1, nil)
	w.Push(math.MinInt64+5, 2, nil)
	if w.Len() != 2 {
		t.Fatalf("Len = %d, want 2 (nothing is older than the span)", w.Len())
	}
	w.Push(math.MaxInt64, 3, nil)
	if w.Len() != 1 || w.At(0) != 3 {
		t.Fatalf("Len = %d, want only the newest left", w.Len())
	}
}

func TestTimedPushAllocs(t *testing.T) {
	w := NewTimed[float64](64, 100)
	sum := 0.0
	evict := func(_ int, v float64) { sum -= v }
	ts := int64(0)
	allocs := testing.AllocsPerRun(1000, func() {
		ts += 3
		w.Push(ts, 1, evict)
		sum++
	})
	if allocs != 0 {
		t.Fatalf("Push allocates %v times per call, want 0", allocs)
	}
	if sum != float64(w.Len()) {
		t.Fatalf("running sum %v, Len %d", sum, w.Len())
	}
}

func BenchmarkTimedPush(b *testing.B) {
	w := NewTimed[float64](4096, 1000)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		w.Push(int64(i), 1, nil)
	}
}

func ExampleTimed() {
	// At most 4 records, and none older than 10 ms behind the newest.
	w := NewTimed[string](4, 10)
	show := func(slot int, v string) { fmt.Println("evict", v) }
	for i, s := range []string{"a", "b", "c", "d", "e"} {
		w.Push(int64(i), s, show) // "a" leaves by count
	}
	w.Push(13, "f", show) // b, c (stamps 1, 2 < 13−10) leave by time
	for i, v := range w.All() {
		fmt.Println(i, w.Stamp(i), v)
	}
	// Output:
	// evict a
	// evict b
	// evict c
	// 0 3 d
	// 1 4 e
	// 2 13 f
}
