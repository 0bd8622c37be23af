package window

import (
	"fmt"
	"hash/fnv"
	"math"
	"testing"
)

func TestFNV1aMatchesStdlib(t *testing.T) {
	for _, s := range []string{"", "a", "unit-07", "plant.example.linear/sensor-123456"} {
		h := fnv.New64a()
		h.Write([]byte(s))
		if got, want := fnv1a64([]byte(s)), h.Sum64(); got != want {
			t.Errorf("fnv1a64(%q) = %x, hash/fnv says %x", s, got, want)
		}
	}
}

func TestSplitterPeriod(t *testing.T) {
	tests := []struct{ every, want int }{{0, 5}, {1, 0}, {-3, 0}, {2, 2}, {7, 7}}
	for _, tc := range tests {
		if got := (Splitter{Every: tc.every}).Period(); got != tc.want {
			t.Errorf("Every %d: Period = %d, want %d", tc.every, got, tc.want)
		}
	}
}

// TestSplitterFraction checks that 1/k of the records are held out, and
// that the decision is a pure function of (seq, key).
func TestSplitterFraction(t *testing.T) {
	tests := []struct {
		name  string
		s     Splitter
		keyed bool
		want  float64
		tol   float64
	}{
		// By sequence the fraction is exact over a multiple of k.
		{"seq default", Splitter{}, false, 1.0 / 5, 0},
		{"seq k=2", Splitter{Every: 2}, false, 1.0 / 2, 0},
		{"seq k=10", Splitter{Every: 10}, false, 1.0 / 10, 0},
		{"disabled k=1", Splitter{Every: 1}, false, 0, 0},
		{"disabled k<0", Splitter{Every: -1, ByKey: true}, true, 0, 0},
		{"key without key falls back", Splitter{Every: 4, ByKey: true}, false, 1.0 / 4, 0},
		// By key the count of held-out keys is Binomial(n, 1/k) if the hash
		// mixes well; 5 standard deviations (sqrt(p(1−p)/n)) is the margin.
		{"key default", Splitter{ByKey: true}, true, 1.0 / 5, 5 * math.Sqrt(0.2*0.8/20000)},
		{"key k=3", Splitter{Every: 3, ByKey: true}, true, 1.0 / 3, 5 * math.Sqrt(2.0/9/20000)},
	}
	const n = 20000
	key := make([]byte, 0, 32)
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			held := 0
			for seq := uint64(0); seq < n; seq++ {
				var k []byte
				if tc.keyed {
					key = fmt.Appendf(key[:0], "unit-%d", seq)
					k = key
				}
				h := tc.s.Holdout(seq, k)
				if h != tc.s.Holdout(seq, k) {
					t.Fatalf("seq %d: not deterministic", seq)
				}
				if h {
					held++
				}
			}
			if got := float64(held) / n; math.Abs(got-tc.want) > tc.tol {
				t.Fatalf("held out %v, want %v ± %v", got, tc.want, tc.tol)
			}
		})
	}
}

// TestSplitterKeyed checks that with ByKey a key's side does not depend on
// the sequence number, and an empty key uses the sequence rule.
func TestSplitterKeyed(t *testing.T) {
	s := Splitter{ByKey: true, Every: 3}
	for _, key := range []string{"a", "b", "unit-07", "x"} {
		first := s.Holdout(0, []byte(key))
		for seq := uint64(1); seq < 50; seq++ {
			if s.Holdout(seq, []byte(key)) != first {
				t.Fatalf("key %q changes side at seq %d", key, seq)
			}
		}
		if want := fnv1a64([]byte(key))%3 == 0; first != want {
			t.Fatalf("key %q: Holdout %v, want %v", key, first, want)
		}
	}
	if s.Holdout(1, nil) || !s.Holdout(2, nil) || !s.Holdout(5, []byte{}) {
		t.Fatal("empty key does not fall back to seq%k == k−1")
	}
}

func TestSplitterAllocs(t *testing.T) {
	s := Splitter{ByKey: true}
	key := []byte("unit-07")
	seq := uint64(0)
	if a := testing.AllocsPerRun(1000, func() { seq++; s.Holdout(seq, key) }); a != 0 {
		t.Fatalf("Holdout allocates %v times per call", a)
	}
}

func ExampleSplitter() {
	s := Splitter{} // every 5th record by sequence number
	for seq := uint64(0); seq < 10; seq++ {
		if s.Holdout(seq, nil) {
			fmt.Println("held out", seq)
		}
	}
	byKey := Splitter{Every: 3, ByKey: true}
	fmt.Println(byKey.Holdout(0, []byte("unit-07")) == byKey.Holdout(99, []byte("unit-07")))
	// Output:
	// held out 4
	// held out 9
	// true
}
