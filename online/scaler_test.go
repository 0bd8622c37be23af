package online

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestScalerAddRemove: the running weighted mean and population variance
// after many adds and removes (a sliding window) match a two-pass
// recomputation on the records left, to 1e-12 relative (Welford 1962;
// Chan, Golub & LeVeque 1983 for removal; two-pass as the reference).
func TestScalerAddRemove(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	const d, n, window = 3, 5000, 300
	xs := make([][]float64, n)
	ws, ys := make([]float64, n), make([]float64, n)
	sc := newScaler(d)
	for i := range n {
		xs[i] = []float64{1e3 + r.NormFloat64(), 5 * r.NormFloat64(), float64(i % 7)}
		ws[i], ys[i] = 0.5+r.Float64(), r.NormFloat64()
		sc.add(xs[i], ws[i], ys[i])
		if i >= window {
			k := i - window
			sc.remove(xs[k], ws[k], ys[k])
		}
	}
	var ref scaler = newScaler(d)
	from := n - window
	ref.recompute(window, func(i int) []float64 { return xs[from+i] }, func(i int) (float64, float64) { return ys[from+i], ws[from+i] })
	if math.Abs(sc.w-ref.w) > 1e-12*ref.w || math.Abs(sc.wy-ref.wy) > 1e-10*(1+math.Abs(ref.wy)) {
		t.Errorf("W %v vs %v, Σwy %v vs %v", sc.w, ref.w, sc.wy, ref.wy)
	}
	for j := range d {
		s1, _ := sc.scale(j)
		s2, _ := ref.scale(j)
		if math.Abs(sc.mean[j]-ref.mean[j]) > 1e-12*(1+math.Abs(ref.mean[j])) || math.Abs(s1-s2) > 1e-9*s2 {
			t.Errorf("feature %d: mean %v vs %v, std %v vs %v", j, sc.mean[j], ref.mean[j], s1, s2)
		}
		if math.Abs(sc.sxy[j]-ref.sxy[j]) > 1e-9*(1+math.Abs(ref.sxy[j])) {
			t.Errorf("feature %d: Σwyx %v vs %v", j, sc.sxy[j], ref.sxy[j])
		}
	}
}

// TestScalerConstant: a constant feature, and one whose spread is below the
// relative floor, get inverse scale 0; a small but real spread does not
// (constRel, common practice).
func TestScalerConstant(t *testing.T) {
	for _, tc := range []struct {
		name   string
		a, b   float64
		wantOK bool
	}{
		{"constant", 4.2, 4.2, false},
		{"zero", 0, 0, false},
		{"below-floor", 1e6, 1e6 * (1 + 1e-17), false},
		{"small-real", 1, 1 + 1e-6, true},
		{"tiny-values", 1e-30, 3e-30, true},
	} {
		sc := newScaler(1)
		for i := range 10 {
			v := tc.a
			if i%2 == 1 {
				v = tc.b
			}
			sc.add([]float64{v}, 1, 0)
		}
		if _, inv := sc.scale(0); (inv != 0) != tc.wantOK || math.IsInf(inv, 0) || math.IsNaN(inv) {
			t.Errorf("%s: inverse scale %v", tc.name, inv)
		}
	}
}
