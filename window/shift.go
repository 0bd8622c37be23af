package window

import (
	"math"
	"slices"
)

// DefaultShiftBins is the number of quantile bins NewShiftReference uses
// when bins <= 0.
const DefaultShiftBins = 10

// PSIFloor is the smallest bin fraction used in the PSI sum, so an empty
// bin does not give log 0 (common practice, no single source).
const PSIFloor = 1e-4

// ShiftReference is a per-feature snapshot of a reference sample (the
// train window when a model was published, say): for each feature its
// mean, population standard deviation (ddof 0), the B−1 inner bin edges at
// the reference's quantiles, and the fraction of reference values in each
// of the B bins. Compare measures how far a newer sample has moved.
//
// Bin i holds the values x with edge[i−1] <= x < edge[i] (bin 0 is
// everything below edge[0], bin B−1 everything from edge[B−2] up). Edges
// are the reference quantiles i/B, i = 1..B−1, with linear interpolation
// between order statistics (h = (n−1)·p). Tied values can make edges equal
// and leave bins empty; a constant column puts every reference value in the
// last bin. NaN and infinite values (missing) are skipped everywhere.
type ShiftReference struct {
	bins   int
	n      []int // finite reference values per feature
	mean   []float64
	std    []float64
	edges  [][]float64 // [feature][bins−1]
	frac   [][]float64 // [feature][bins]
	counts []float64   // scratch for Compare
}

// FeatureShift is the shift of one feature against the reference.
type FeatureShift struct {
	// Feature is the feature's index (its column).
	Feature int
	// MeanShift is (mean_now − mean_ref)/std_ref, or 0 when std_ref is 0
	// or either sample has no finite value.
	MeanShift float64
	// PSI is the population stability index Σ (a_i − e_i)·ln(a_i/e_i) over
	// the reference bins, with a_i the current and e_i the reference
	// fraction, each floored at PSIFloor; 0 when either sample has no
	// finite value. Rule of thumb: above 0.25 is a significant shift.
	PSI float64
}

// NewShiftReference builds a reference from cols, where cols[j] holds the
// values of feature j (columns may differ in length). bins <= 0 means 10.
// The columns are not retained.
func NewShiftReference(cols [][]float64, bins int) *ShiftReference {
	if bins <= 0 {
		bins = DefaultShiftBins
	}
	d := len(cols)
	r := &ShiftReference{
		bins:   bins,
		n:      make([]int, d),
		mean:   make([]float64, d),
		std:    make([]float64, d),
		edges:  make([][]float64, d),
		frac:   make([][]float64, d),
		counts: make([]float64, bins),
	}
	var sorted []float64
	for j, col := range cols {
		sorted = finiteSorted(sorted[:0], col)
		r.n[j] = len(sorted)
		r.mean[j], r.std[j] = meanStd(sorted)
		r.edges[j] = quantileEdges(sorted, bins)
		r.frac[j] = make([]float64, bins)
		r.fractions(j, col, r.frac[j])
	}
	return r
}

// finiteSorted appends the finite values of col to dst and sorts them.
func finiteSorted(dst, col []float64) []float64 {
	for _, x := range col {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			dst = append(dst, x)
		}
	}
	slices.Sort(dst)
	return dst
}

// meanStd returns the mean and population standard deviation of xs (two
// passes; 0, 0 when empty).
func meanStd(xs []float64) (mean, std float64) {
	if len(xs) == 0 {
		return 0, 0
	}
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	var v float64
	for _, x := range xs {
		v += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(v / float64(len(xs)))
}

// quantileEdges returns the quantiles i/bins, i = 1..bins−1, of the sorted
// values, interpolating linearly between order statistics at h = (n−1)·p
// (Hyndman & Fan 1996, "Sample quantiles in statistical packages", Am.
// Stat. 50, definition 7). All edges are 0 when sorted is empty.
func quantileEdges(sorted []float64, bins int) []float64 {
	e := make([]float64, bins-1)
	n := len(sorted)
	if n == 0 {
		return e
	}
	for i := range e {
		h := float64(n-1) * float64(i+1) / float64(bins)
		lo := int(h)
		e[i] = sorted[lo]
		if lo+1 < n {
			e[i] += (h - float64(lo)) * (sorted[lo+1] - sorted[lo])
		}
	}
	return e
}

// Bin returns the number of edges <= x, the index of x's bin among the
// edges of ShiftReference.Edges; callers that keep their own bin counts use
// it to stay bit-for-bit consistent with Compare.
func Bin(edges []float64, x float64) int {
	lo, hi := 0, len(edges)
	for lo < hi {
		mid := int(uint(lo+hi) >> 1)
		if edges[mid] <= x {
			lo = mid + 1
		} else {
			hi = mid
		}
	}
	return lo
}

// fractions fills dst with the fraction of the finite values of col in
// each of feature j's bins, and returns their count and mean.
func (r *ShiftReference) fractions(j int, col, dst []float64) (n int, mean float64) {
	clear(dst)
	for _, x := range col {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		dst[Bin(r.edges[j], x)]++
		n++
		mean += x
	}
	if n == 0 {
		return 0, 0
	}
	for i := range dst {
		dst[i] /= float64(n)
	}
	return n, mean / float64(n)
}

// Compare measures each feature of cols (cols[j] = current values of
// feature j) against the reference and returns one FeatureShift per
// feature, appended to dst[:0] (pass the previous result to reuse it; then
// Compare does not allocate). It panics if len(cols) != Features(), a
// programmer error. Compare uses scratch space in r, so one reference must
// not be compared from two goroutines at once.
func (r *ShiftReference) Compare(cols [][]float64, dst []FeatureShift) []FeatureShift {
	if len(cols) != len(r.mean) {
		panic("window: ShiftReference.Compare: column count differs from the reference")
	}
	dst = dst[:0]
	for j, col := range cols {
		fs := FeatureShift{Feature: j}
		n, mean := r.fractions(j, col, r.counts)
		if n > 0 && r.n[j] > 0 {
			if r.std[j] > 0 {
				fs.MeanShift = (mean - r.mean[j]) / r.std[j]
			}
			fs.PSI = PSI(r.counts, r.frac[j])
		}
		dst = append(dst, fs)
	}
	return dst
}

// PSI returns the population stability index Σ (a_i − e_i)·ln(a_i/e_i) of
// the current fractions a against the expected (reference) fractions e,
// with each fraction floored at PSIFloor. It panics if the lengths differ.
func PSI(a, e []float64) float64 {
	if len(a) != len(e) {
		panic("window: PSI: fraction slices differ in length")
	}
	var s float64
	for i := range a {
		ai, ei := max(a[i], PSIFloor), max(e[i], PSIFloor)
		s += (ai - ei) * math.Log(ai/ei)
	}
	return s
}

// Features returns the number of features in the reference.
func (r *ShiftReference) Features() int { return len(r.mean) }

// Bins returns the number of bins B.
func (r *ShiftReference) Bins() int { return r.bins }

// Count returns the number of finite reference values of feature j.
func (r *ShiftReference) Count(j int) int { return r.n[j] }

// Mean returns the reference mean of feature j.
func (r *ShiftReference) Mean(j int) float64 { return r.mean[j] }

// Std returns the reference population standard deviation of feature j.
func (r *ShiftReference) Std(j int) float64 { return r.std[j] }

// Edges returns the B−1 inner bin edges of feature j, ascending. The slice
// belongs to r and must not be modified.
func (r *ShiftReference) Edges(j int) []float64 { return r.edges[j] }

// Fractions returns the reference fraction of each of feature j's B bins
// (summing to 1, or all 0 without finite values). The slice belongs to r
// and must not be modified.
func (r *ShiftReference) Fractions(j int) []float64 { return r.frac[j] }
