package online

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// rocTieExample is a small worked example with ties across the classes:
// positives score 0.9, 0.8, 0.6 and negatives 0.8, 0.6, 0.3, 0.2.
var rocTieExample = struct{ probs, labels []float64 }{
	probs:  []float64{0.9, 0.8, 0.8, 0.6, 0.6, 0.3, 0.2},
	labels: []float64{1, 1, 0, 0, 1, 0, 0},
}

// TestAUCWorkedExample checks AUC against values computed by hand over the
// 3 × 4 (positive, negative) pairs, ties counting one half (Mann-Whitney;
// Fawcett 2006 §7): 0.9 beats all 4 negatives, 0.8 ties one and beats 3
// (3.5), 0.6 ties one and beats 2 (2.5): 10/12. With the 0.9 positive
// weighted 2 the pair weight is 4·4 = 16 and the credit 8 + 3.5 + 2.5 = 14.
func TestAUCWorkedExample(t *testing.T) {
	tests := []struct {
		name    string
		weights []float64
		want    float64
	}{
		{"unweighted", nil, 10.0 / 12},
		{"zero weight means one", []float64{0, 0, 0, 0, 0, 0, 0}, 10.0 / 12},
		{"weighted", []float64{2, 1, 1, 1, 1, 1, 1}, 14.0 / 16},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := AUC(rocTieExample.probs, rocTieExample.labels, tc.weights)
			if math.Abs(got-tc.want) > 1e-15 {
				t.Fatalf("AUC = %v, want %v", got, tc.want)
			}
		})
	}
}

// TestAUCEdgeCases checks the documented skipping and undefined cases
// (definitions of this package; the perfect/reversed values are the
// Mann-Whitney extremes, Fawcett 2006 §7).
func TestAUCEdgeCases(t *testing.T) {
	tests := []struct {
		name                   string
		probs, labels, weights []float64
		want                   float64 // NaN: undefined
	}{
		{"perfect", []float64{0.9, 0.1}, []float64{1, 0}, nil, 1},
		{"reversed", []float64{0.1, 0.9}, []float64{1, 0}, nil, 0},
		{"all tied", []float64{0.5, 0.5, 0.5}, []float64{1, 0, 0}, nil, 0.5},
		{"no positive", []float64{0.5, 0.2}, []float64{0, 0}, nil, math.NaN()},
		{"no negative", []float64{0.5, 0.2}, []float64{1, 1}, nil, math.NaN()},
		{"empty", nil, nil, nil, math.NaN()},
		{"skips NaN score and bad label", []float64{0.9, math.NaN(), 0.1, 0.95}, []float64{1, 0, 0, 2}, nil, 1},
		{"skips negative weight", []float64{0.9, 0.95, 0.1}, []float64{1, 0, 0}, []float64{1, -1, 1}, 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := AUC(tc.probs, tc.labels, tc.weights)
			if math.IsNaN(tc.want) != math.IsNaN(got) || (!math.IsNaN(got) && got != tc.want) {
				t.Fatalf("AUC = %v, want %v", got, tc.want)
			}
		})
	}
}

// rocBruteMannWhitney is the weighted Mann-Whitney U statistic over all
// (positive, negative) pairs divided by the pair weight (Mann & Whitney
// 1947; ties half, as Fawcett 2006 §7 relates it to the AUC).
func rocBruteMannWhitney(probs, labels, weights []float64) float64 {
	var u, pairs float64
	for i := range probs {
		if labels[i] != 1 {
			continue
		}
		for j := range probs {
			if labels[j] != 0 {
				continue
			}
			w := weights[i] * weights[j]
			pairs += w
			switch {
			case probs[i] > probs[j]:
				u += w
			case probs[i] == probs[j]:
				u += w / 2
			}
		}
	}
	return u / pairs
}

// TestAUCMatchesMannWhitney checks AUC against the brute-force
// Mann-Whitney statistic over all (negative, positive) pairs, ties counted
// one half, with weights w_i·w_j per pair. Source: the AUC equals the
// Mann-Whitney U statistic divided by n0·n1 (Hanley & McNeil 1982, "The
// meaning and use of the area under a receiver operating characteristic
// (ROC) curve", Radiology 143); the pair weighting is common practice, no
// single source.
func TestAUCMatchesMannWhitney(t *testing.T) {
	for seed := uint64(1); seed <= 20; seed++ {
		rng := rand.New(rand.NewPCG(seed, 7))
		n := 20 + rng.IntN(200)
		probs, labels, weights := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range probs {
			labels[i] = float64(rng.IntN(2))
			// Coarse scores force many ties within and across the classes.
			probs[i] = math.Round((rng.Float64()+0.3*labels[i])*20) / 20
			weights[i] = 0.25 + rng.Float64()*3
		}
		labels[0], labels[1] = 0, 1
		want := rocBruteMannWhitney(probs, labels, weights)
		if got := AUC(probs, labels, weights); math.Abs(got-want) > 1e-12 {
			t.Errorf("seed %d: AUC = %v, brute-force Mann-Whitney = %v", seed, got, want)
		}
	}
}

func TestROCWorkedExample(t *testing.T) {
	// Hand-computed from rocTieExample (P = 3, N = 4; Fawcett 2006, Algorithm 1).
	want := []ROCPoint{
		{math.Nextafter(0.9, 2), 0, 0, 1},
		{0.9, 1.0 / 3, 0, 1},
		{0.8, 2.0 / 3, 1.0 / 4, 2.0 / 3},
		{0.6, 1, 2.0 / 4, 3.0 / 5},
		{0.3, 1, 3.0 / 4, 3.0 / 6},
		{0.2, 1, 1, 3.0 / 7},
	}
	got := ROC(rocTieExample.probs, rocTieExample.labels, nil)
	if len(got) != len(want) {
		t.Fatalf("ROC has %d points, want %d: %v", len(got), len(want), got)
	}
	for i := range want {
		g, w := got[i], want[i]
		if g.Threshold != w.Threshold || math.Abs(g.TPR-w.TPR) > 1e-15 ||
			math.Abs(g.FPR-w.FPR) > 1e-15 || math.Abs(g.Precision-w.Precision) > 1e-15 {
			t.Errorf("point %d = %+v, want %+v", i, g, w)
		}
	}
}

// TestROCMonotone checks the properties of any ROC curve (Fawcett 2006 §3):
// starts at (0, 0), ends at (1, 1), thresholds fall, TPR and FPR never fall,
// and the trapezoid area under the points equals AUC.
func TestROCMonotone(t *testing.T) {
	for seed := uint64(1); seed <= 10; seed++ {
		rng := rand.New(rand.NewPCG(seed, 11))
		n := 50 + rng.IntN(500)
		probs, labels, weights := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range probs {
			labels[i] = float64(rng.IntN(2))
			probs[i] = Sigmoid(rng.NormFloat64() + labels[i])
			if i%7 == 0 {
				probs[i] = math.Round(probs[i]*10) / 10
			}
			weights[i] = rng.Float64() * 2
		}
		labels[0], labels[1] = 0, 1
		pts := ROC(probs, labels, weights)
		if first := pts[0]; first.TPR != 0 || first.FPR != 0 {
			t.Fatalf("seed %d: first point %+v, want (0, 0)", seed, first)
		}
		if last := pts[len(pts)-1]; last.TPR != 1 || last.FPR != 1 {
			t.Fatalf("seed %d: last point %+v, want (1, 1)", seed, last)
		}
		var area float64
		for i := 1; i < len(pts); i++ {
			a, b := pts[i-1], pts[i]
			if !(b.Threshold < a.Threshold) || b.TPR < a.TPR || b.FPR < a.FPR {
				t.Fatalf("seed %d: point %d %+v after %+v is not monotone", seed, i, b, a)
			}
			area += (b.FPR - a.FPR) * (a.TPR + b.TPR) / 2
		}
		if auc := AUC(probs, labels, weights); math.Abs(area-auc) > 1e-12 {
			t.Errorf("seed %d: trapezoid area %v, AUC %v", seed, area, auc)
		}
	}
}

func TestROCUndefined(t *testing.T) {
	if pts := ROC([]float64{0.1, 0.2}, []float64{0, 0}, nil); pts != nil {
		t.Fatalf("ROC without positives = %v, want nil", pts)
	}
}

func TestROCPanicsOnLengthMismatch(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Fatal("no panic on mismatched lengths")
		}
	}()
	ROC([]float64{0.1, 0.2}, []float64{0}, nil)
}

// TestThresholdForFPRTable checks the definition on hand-made data: the
// smallest observed score t with #{negatives ≥ t}/N ≤ target, ties alarming.
func TestThresholdForFPRTable(t *testing.T) {
	// Negatives 0.1 … 1.0 (N = 10), positives 0.55 and 0.95; 0.8 is tied.
	probs := []float64{0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 0.55, 0.95, 0.8}
	labels := []float64{0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1}
	tests := []struct {
		name   string
		target float64
		want   float64
		ok     bool
	}{
		{"zero false alarms", 0, math.Nextafter(1, 2), true},
		{"below one negative", 0.05, math.Nextafter(1, 2), true},
		{"one negative, then the positive below it", 0.1, 0.95, true},
		{"two negatives", 0.2, 0.9, true},
		{"tied scores alarm together", 0.3, 0.8, true},
		{"half reaches the positive below", 0.5, 0.55, true},
		{"all", 1, 0.1, true},
		{"above one", 2, 0.1, true},
		{"negative target", -0.1, 0, false},
		{"NaN target", math.NaN(), 0, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := ThresholdForFPR(probs, labels, tc.target)
			if ok != tc.ok || got != tc.want {
				t.Fatalf("ThresholdForFPR(%v) = %v, %v; want %v, %v", tc.target, got, ok, tc.want, tc.ok)
			}
		})
	}
	if _, ok := ThresholdForFPR([]float64{0.3, 0.4}, []float64{1, 1}, 0.1); ok {
		t.Error("ok without negatives")
	}
}

// rocTwoGaussians draws logistic scores σ(η) with η ~ N(0, 1) for negatives and
// N(2, 1) for positives (a binormal ROC model; Fawcett 2006 §4 discusses
// such score distributions).
func rocTwoGaussians(rng *rand.Rand, nNeg, nPos int) (probs, labels []float64) {
	for i := 0; i < nNeg+nPos; i++ {
		y := 0.0
		if i >= nNeg {
			y = 1
		}
		probs = append(probs, Sigmoid(rng.NormFloat64()+2*y))
		labels = append(labels, y)
	}
	return probs, labels
}

// TestThresholdForFPRFreshData tunes a threshold on one sample and checks the
// false-alarm rate realized on a fresh sample from the same distribution
// lies within 3 standard deviations of Binomial(n, target)/n (normal
// approximation of the binomial; common practice). The tuning sample is 10×
// larger so its own sampling error adds only ~5% to that spread.
func TestThresholdForFPRFreshData(t *testing.T) {
	const nTune, nFresh = 100000, 10000
	for seed := uint64(1); seed <= 5; seed++ {
		rng := rand.New(rand.NewPCG(seed, 3))
		probs, labels := rocTwoGaussians(rng, nTune, nTune/10)
		fresh, _ := rocTwoGaussians(rng, nFresh, 0)
		for _, target := range []float64{0.01, 0.05, 0.2} {
			th, ok := ThresholdForFPR(probs, labels, target)
			if !ok {
				t.Fatalf("seed %d target %v: not ok", seed, target)
			}
			alarms := 0
			for _, p := range fresh {
				if p >= th {
					alarms++
				}
			}
			realized := float64(alarms) / nFresh
			tol := 3 * math.Sqrt(target*(1-target)/nFresh)
			t.Logf("seed %d target %.2f: threshold %.5f realized FPR %.4f (tolerance ±%.4f)", seed, target, th, realized, tol)
			if math.Abs(realized-target) > tol {
				t.Errorf("seed %d target %v: realized FPR %v outside ±%v", seed, target, realized, tol)
			}
		}
	}
}

// TestThresholdForPrecisionTable checks the definition on hand-made data.
func TestThresholdForPrecisionTable(t *testing.T) {
	// Scores 40 … 1 (descending): the top 10 positive, then alternating
	// negative/positive for 10 records, then 20 negatives.
	var probs, labels []float64
	for i := 0; i < 40; i++ {
		y := 0.0
		if i < 10 || (i < 20 && i%2 == 1) {
			y = 1
		}
		probs = append(probs, float64(40-i)/40)
		labels = append(labels, y)
	}
	// Precision after the top k records: k ≤ 10: 1 (but fewer than 10
	// positives before k = 10); k = 11: 10/11; 12: 11/12; 14: 12/14;
	// 20: 15/20; 40: 15/40.
	tests := []struct {
		name   string
		target float64
		want   float64
		ok     bool
	}{
		{"perfect needs ten positives", 1, 31.0 / 40, true},
		{"0.9 takes 11/12", 0.9, 29.0 / 40, true},
		{"0.75 takes 15/20", 0.75, 21.0 / 40, true},
		{"anything takes all", 0, 1.0 / 40, true},
		{"impossible", 1.1, 0, false},
		{"NaN", math.NaN(), 0, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := ThresholdForPrecision(probs, labels, tc.target)
			if ok != tc.ok || got != tc.want {
				t.Fatalf("ThresholdForPrecision(%v) = %v, %v; want %v, %v", tc.target, got, ok, tc.want, tc.ok)
			}
		})
	}
	// Too few positives to meet the minimum, and a missing class.
	few := []float64{0.9, 0.8, 0.1}
	if _, ok := ThresholdForPrecision(few, []float64{1, 1, 0}, 0.5); ok {
		t.Error("ok with fewer than MinPrecisionPositives positives")
	}
	if _, ok := ThresholdForPrecision(few, []float64{1, 1, 1}, 0.5); ok {
		t.Error("ok without negatives")
	}
}

func BenchmarkAUC(b *testing.B) {
	for _, n := range []int{100, 2000, 20000} {
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			probs, labels := rocTwoGaussians(rand.New(rand.NewPCG(1, 1)), n-n/10, n/10)
			for b.Loop() {
				AUC(probs, labels, nil)
			}
		})
	}
}

func ExampleThresholdForFPR() {
	// Held-out alarm probabilities: 10 normal records, 3 faults.
	probs := []float64{0.02, 0.05, 0.08, 0.1, 0.12, 0.2, 0.25, 0.3, 0.45, 0.7, 0.6, 0.8, 0.9}
	labels := []float64{0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1}
	t, ok := ThresholdForFPR(probs, labels, 0.1) // at most 1 false alarm in 10
	fmt.Println(t, ok)
	// Output: 0.6 true
}

// TestAUCSortedNaNTerminates feeds a NaN score straight into the sorted-run
// walk (as a diverged η would reach it through Ladder.Score): the walk must
// finish and count every record once. Common practice, no single source.
func TestAUCSortedNaNTerminates(t *testing.T) {
	r := []ranked{{s: 0.9, y: 1, w: 1}, {s: math.NaN(), y: 0, w: 1}, {s: math.NaN(), y: 1, w: 1}, {s: 0.1, y: 0, w: 1}}
	done := make(chan float64, 1)
	go func() { done <- aucSorted(r) }()
	select {
	case got := <-done:
		if math.IsInf(got, 0) {
			t.Fatalf("aucSorted = %v, want a finite value or NaN", got)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("aucSorted did not return with a NaN score")
	}
}
