package online

import (
	"errors"
	"math"
	"slices"
	"testing"
)

// holdoutBadRecords are records every Add must reject, with the sentinel each one
// wraps (the validation rules of Record and Ladder.Add in this package).
func holdoutBadRecords() []struct {
	name string
	r    Record
	err  error
} {
	return []struct {
		name string
		r    Record
		err  error
	}{
		{"short", Record{X: []float64{1}, Y: 1}, ErrDimension},
		{"long", Record{X: []float64{1, 2, 3}, Y: 1}, ErrDimension},
		{"nil X", Record{Y: 1}, ErrDimension},
		{"Inf feature", Record{X: []float64{math.Inf(1), 2}, Y: 1}, ErrNotFinite},
		{"-Inf feature", Record{X: []float64{1, math.Inf(-1)}, Y: 1}, ErrNotFinite},
		{"NaN label", Record{X: []float64{1, 2}, Y: math.NaN()}, ErrNotFinite},
		{"Inf label", Record{X: []float64{1, 2}, Y: math.Inf(1)}, ErrNotFinite},
		{"negative weight", Record{X: []float64{1, 2}, Y: 1, W: -1}, ErrWeight},
		{"NaN weight", Record{X: []float64{1, 2}, Y: 1, W: math.NaN()}, ErrWeight},
		{"Inf weight", Record{X: []float64{1, 2}, Y: 1, W: math.Inf(1)}, ErrWeight},
		{"huge feature", Record{X: []float64{1, 1e51}, Y: 1}, ErrNotFinite},
		{"huge label", Record{X: []float64{1, 2}, Y: -1e51}, ErrNotFinite},
		{"tiny weight", Record{X: []float64{1, 2}, Y: 1, W: 1e-60}, ErrWeight},
		{"huge weight", Record{X: []float64{1, 2}, Y: 1, W: 1e60}, ErrWeight},
	}
}

func TestHoldoutRejects(t *testing.T) {
	for _, tc := range holdoutBadRecords() {
		t.Run(tc.name, func(t *testing.T) {
			h := NewHoldout(2, 4)
			if err := h.Add(Record{X: []float64{5, 6}, Y: 7}); err != nil {
				t.Fatal(err)
			}
			err := h.Add(tc.r)
			if !errors.Is(err, tc.err) {
				t.Fatalf("Add = %v, want %v", err, tc.err)
			}
			if x, y, _ := h.At(0); h.Len() != 1 || x[0] != 5 || y != 7 {
				t.Fatalf("rejected record changed the ring: len %d, x %v, y %v", h.Len(), x, y)
			}
		})
	}
}

func TestHoldoutLabels(t *testing.T) {
	tests := []struct {
		name string
		loss Loss
		y    float64
		err  error
	}{
		{"any label without a loss", nil, 2.5, nil},
		{"squared accepts any finite label", Squared{}, -3, nil},
		{"logistic accepts 0", Logistic{}, 0, nil},
		{"logistic accepts 1", Logistic{}, 1, nil},
		{"logistic rejects 2", Logistic{}, 2, ErrLabel},
		{"logistic rejects 0.5", Logistic{}, 0.5, ErrLabel},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			h := NewHoldout(1, 2)
			if tc.loss != nil {
				h.SetLoss(tc.loss)
			}
			if err := h.Add(Record{X: []float64{0}, Y: tc.y}); !errors.Is(err, tc.err) || (tc.err == nil && err != nil) {
				t.Fatalf("Add(y=%v) = %v, want %v", tc.y, err, tc.err)
			}
		})
	}
}

// TestHoldoutRing checks FIFO order, eviction, copying, weights and Reset
// (definition of a count ring; no external source).
func TestHoldoutRing(t *testing.T) {
	h := NewHoldout(2, 3)
	buf := []float64{0, 0}
	for i := 1; i <= 5; i++ {
		buf[0], buf[1] = float64(i), math.NaN()
		w := 0.0
		if i == 5 {
			w = 2.5
		}
		if err := h.Add(Record{X: buf, Y: float64(10 * i), W: w}); err != nil {
			t.Fatal(err)
		}
	}
	buf[0] = 99 // the ring holds copies
	if h.Len() != 3 || h.Cap() != 3 || h.Features() != 2 {
		t.Fatalf("Len %d Cap %d Features %d", h.Len(), h.Cap(), h.Features())
	}
	for i, want := range []float64{3, 4, 5} {
		x, y, w := h.At(i)
		wantW := 1.0
		if want == 5 {
			wantW = 2.5
		}
		if x[0] != want || !math.IsNaN(x[1]) || y != 10*want || w != wantW {
			t.Errorf("At(%d) = %v, %v, %v; want x0 %v, NaN, y %v, w %v", i, x, y, w, want, 10*want, wantW)
		}
	}
	if y, w := h.Labels(nil), h.Weights(make([]float64, 9)); !slices.Equal(y, []float64{30, 40, 50}) ||
		!slices.Equal(w, []float64{1, 1, 2.5}) {
		t.Errorf("Labels %v, Weights %v", y, w)
	}
	h.Reset()
	if h.Len() != 0 {
		t.Fatalf("Len after Reset = %d", h.Len())
	}
	if err := h.Add(Record{X: []float64{1, 2}, Y: 3}); err != nil || h.Len() != 1 {
		t.Fatalf("Add after Reset: %v, Len %d", err, h.Len())
	}
	if x, _, _ := h.At(0); x[0] != 1 {
		t.Fatalf("At(0) after Reset = %v", x)
	}
}

func TestHoldoutAtPanics(t *testing.T) {
	h := NewHoldout(1, 2)
	defer func() {
		if recover() == nil {
			t.Fatal("At on an empty ring did not panic")
		}
	}()
	h.At(0)
}

func TestHoldoutAddAllocs(t *testing.T) {
	h := NewHoldout(8, 16)
	h.SetLoss(Logistic{})
	r := Record{X: make([]float64, 8), Y: 1, W: 2}
	if n := testing.AllocsPerRun(200, func() {
		if err := h.Add(r); err != nil {
			t.Fatal(err)
		}
	}); n != 0 {
		t.Fatalf("Add allocates %v times per call", n)
	}
}

// TestHoldoutValidationMatchesLadder feeds the same bad records to a Ladder
// and a Holdout: Holdout.Add must validate exactly as Ladder.Add does.
func TestHoldoutValidationMatchesLadder(t *testing.T) {
	for _, loss := range []Loss{Squared{}, Logistic{}} {
		l, err := NewLadder(&Options{Loss: loss, Features: 2, Size: 2})
		if err != nil {
			t.Fatal(err)
		}
		h := NewHoldout(2, 4)
		h.SetLoss(loss)
		cases := holdoutBadRecords()
		cases = append(cases, struct {
			name string
			r    Record
			err  error
		}{"label 2", Record{X: []float64{1, 2}, Y: 2}, nil})
		for _, tc := range cases {
			le, he := l.Add(tc.r), h.Add(tc.r)
			for _, sentinel := range []error{ErrDimension, ErrNotFinite, ErrLabel, ErrWeight} {
				if errors.Is(le, sentinel) != errors.Is(he, sentinel) {
					t.Errorf("%s %s: Ladder.Add = %v, Holdout.Add = %v", loss.Name(), tc.name, le, he)
				}
			}
			if (le == nil) != (he == nil) {
				t.Errorf("%s %s: Ladder.Add = %v, Holdout.Add = %v", loss.Name(), tc.name, le, he)
			}
		}
	}
}

func BenchmarkHoldoutAdd(b *testing.B) {
	h := NewHoldout(32, 2000)
	r := Record{X: make([]float64, 32), Y: 1}
	for b.Loop() {
		_ = h.Add(r)
	}
}

// TestHoldoutKeepNewest checks that KeepNewest leaves exactly the newest n
// records in order, with their missing-value flags, that the ring keeps
// working as a FIFO afterwards, and that Score on the result equals Score on
// a holdout filled with those records alone (definition of the operation;
// no external source).
func TestHoldoutKeepNewest(t *testing.T) {
	tests := []struct {
		name       string
		added      int // records 1..added go in; capacity 5
		keep, want int // argument and resulting Len
	}{
		{"keep some, not wrapped", 4, 2, 2},
		{"keep some, wrapped", 8, 3, 3},
		{"keep one", 7, 1, 1},
		{"keep all", 8, 5, 5},
		{"more than held", 3, 10, 3},
		{"zero", 8, 0, 0},
		{"negative", 6, -2, 0},
		{"empty ring", 0, 2, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			h := NewHoldout(2, 5)
			for i := 1; i <= tc.added; i++ {
				mustAdd(t, h, keepRecord(i))
			}
			h.KeepNewest(tc.keep)
			if h.Len() != tc.want {
				t.Fatalf("Len = %d, want %d", h.Len(), tc.want)
			}
			checkNewest(t, h, tc.added)
			for i := tc.added + 1; i <= tc.added+7; i++ { // refill past the capacity
				mustAdd(t, h, keepRecord(i))
				checkNewest(t, h, i)
			}
		})
	}
}

// keepRecord is record i of TestHoldoutKeepNewest: x = (i, NaN for odd i),
// y = 10i, w = i.
func keepRecord(i int) Record {
	x1 := float64(-i)
	if i%2 == 1 {
		x1 = math.NaN()
	}
	return Record{X: []float64{float64(i), x1}, Y: float64(10 * i), W: float64(i)}
}

func mustAdd(t *testing.T, h *Holdout, r Record) {
	t.Helper()
	if err := h.Add(r); err != nil {
		t.Fatal(err)
	}
}

// checkNewest checks that h holds records last−Len()+1 .. last of
// keepRecord, oldest first, with the right missing-value flags.
func checkNewest(t *testing.T, h *Holdout, last int) {
	t.Helper()
	for k := range h.Len() {
		i := last - h.Len() + 1 + k
		x, y, w := h.At(k)
		_, miss := h.record(h.slot(k))
		if x[0] != float64(i) || y != float64(10*i) || w != float64(i) || miss != (i%2 == 1) || math.IsNaN(x[1]) != miss {
			t.Fatalf("At(%d) = %v, %v, %v (missing flag %v), want record %d", k, x, y, w, miss, i)
		}
	}
}

// TestHoldoutKeepNewestScore checks Score after KeepNewest against Score on
// a fresh holdout given only the kept records: same records in the same
// order, so the same scores bit for bit.
func TestHoldoutKeepNewestScore(t *testing.T) {
	for _, loss := range []Loss{Squared{}, Logistic{}} {
		l, h := scoreStream(t, loss, 6, 4, 300, 90, true, 0, 0.2)
		const keep = 37
		fresh := NewHoldout(6, 90)
		for k := h.Len() - keep; k < h.Len(); k++ {
			x, y, w := h.At(k)
			mustAdd(t, fresh, Record{X: x, Y: y, W: w})
		}
		h.KeepNewest(keep)
		got, want := l.Score(h, nil), l.Score(fresh, nil)
		if !slices.Equal(got, want) {
			t.Errorf("%s: after KeepNewest %+v, fresh holdout %+v", loss.Name(), got, want)
		}
	}
}

func TestHoldoutKeepNewestAllocs(t *testing.T) {
	h := NewHoldout(4, 16)
	r := Record{X: make([]float64, 4), Y: 1}
	if n := testing.AllocsPerRun(100, func() {
		for range 20 {
			_ = h.Add(r)
		}
		h.KeepNewest(3)
	}); n != 0 {
		t.Fatalf("KeepNewest allocates %v times per call", n)
	}
}
