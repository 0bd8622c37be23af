package pipeline

import (
	"math"

	"lariat/window"
)

// binMissing marks a sample value that is not binned (NaN or ±Inf).
const binMissing = 0xff

// featureSample is a ring of the newest n_s train records for the data
// drift check. A record is stored with one copy of its feature vector (row
// by row), and once a reference is set (setReference) each finite value's
// bin against the reference edges is kept beside it, with per-feature bin
// counts updated as records enter and leave. A comparison (compare) then
// costs O(d·B) for the fractions and one pass over the ring for the means,
// instead of a binary search for each of the n_s·d values every
// retune.every train records. Its results are those of
// window.ShiftReference.Compare on the same values, bit for bit (the
// fractions are the same integer counts over the same n, the means the same
// sums in the same order). Pushing does not allocate.
type featureSample struct {
	d    int
	rows []float64 // [capacity][d], by slot
	y    []float64 // [capacity]
	pos  int       // next slot
	n    int       // slots filled

	// Against the reference (nil: no bins are kept).
	ref      *window.ShiftReference
	bins     int
	edges    [][]float64 // ref.Edges(j)
	searched []bool      // edges[j] not finite and ascending: bin by window's binary search
	slotBin  []uint8     // [capacity][d], the bin of each value or binMissing
	counts   []int32     // [d][bins]

	// Scratch for setReference and compare.
	cols  [][]float64 // [d][capacity], the sample by column
	sums  []float64   // [d]
	fracs []float64   // [bins]
}

func newFeatureSample(features, capacity int) *featureSample {
	return &featureSample{
		d:       features,
		rows:    make([]float64, features*capacity),
		y:       make([]float64, capacity),
		slotBin: make([]uint8, features*capacity),
		sums:    make([]float64, features),
	}
}

// push stores one record, overwriting the oldest when full, and keeps the
// bin counts current. x must not be longer than the sample's width; missing
// trailing features count as NaN.
func (s *featureSample) push(x []float64, y float64) {
	base := s.pos * s.d
	row := s.rows[base : base+s.d]
	k := copy(row, x)
	for j := k; j < len(row); j++ {
		row[j] = math.NaN()
	}
	s.y[s.pos] = y
	if s.ref != nil {
		s.rebin(base, s.n == len(s.y))
	}
	if s.pos++; s.pos == len(s.y) {
		s.pos = 0
	}
	if s.n < len(s.y) {
		s.n++
	}
}

// rebin bins the row at base, first removing the bins of the value it
// replaced when evict is set.
func (s *featureSample) rebin(base int, evict bool) {
	row := s.rows[base : base+s.d]
	sb := s.slotBin[base : base+s.d]
	sb = sb[:len(row)]
	counts, nb := s.counts, s.bins
	for j, v := range row {
		if b := sb[j]; evict && b != binMissing {
			counts[j*nb+int(b)]--
		}
		if v-v != 0 { // NaN or ±Inf: missing
			sb[j] = binMissing
			continue
		}
		var b int
		switch e := s.edges[j]; {
		case s.searched[j]:
			b = window.Bin(e, v)
		case len(e) == window.DefaultShiftBins-1:
			b = countLE9((*[window.DefaultShiftBins - 1]float64)(e), v)
		default:
			b = countLE(e, v)
		}
		sb[j] = uint8(b)
		counts[j*nb+b]++
	}
}

// countLE returns the number of edges <= v for finite, ascending edges and
// a finite v: window's binary search for the first edge > v gives the
// same. It has no branch on the value: for finite a and b, the rounded
// a − b has its sign bit set exactly when a < b (the difference of two
// distinct doubles is never rounded to 0, thanks to subnormals, nor across
// 0; x − x is +0 in round-to-nearest, and −0 − +0 = −0, which the +0 below
// turns into +0 − +0: IEEE 754-2008 §6.3, value from memory, checked by
// TestFeatureSampleBins). A compare-and-increment loop, when inlined,
// compiles to a branch that random values mispredict about half the time.
func countLE(edges []float64, v float64) int {
	v += 0 // −0 → +0
	var below uint64
	for _, e := range edges {
		below += math.Float64bits(v-e) >> 63
	}
	return len(edges) - int(below)
}

// countLE9 is countLE for the default 10 bins, unrolled (measured about
// 40% faster than the loop).
func countLE9(e *[window.DefaultShiftBins - 1]float64, v float64) int {
	v += 0 // −0 → +0
	below := signBit(v-e[0]) + signBit(v-e[1]) + signBit(v-e[2]) + signBit(v-e[3]) +
		signBit(v-e[4]) + signBit(v-e[5]) + signBit(v-e[6]) + signBit(v-e[7]) + signBit(v-e[8])
	return len(e) - int(below)
}

func signBit(f float64) uint64 { return math.Float64bits(f) >> 63 }

// finiteAscending reports whether every edge is finite and none is below
// the one before.
func finiteAscending(edges []float64) bool {
	for i, e := range edges {
		if e-e != 0 || (i > 0 && e < edges[i-1]) {
			return false
		}
	}
	return true
}

func (s *featureSample) full() bool { return s.n == len(s.y) }

// size returns the sample's capacity n_s.
func (s *featureSample) size() int { return len(s.y) }

// columns returns the sample by column (cols[j] = the values of feature j
// in slot order), in scratch space reused by the next call. It allocates
// on its first call only.
func (s *featureSample) columns() [][]float64 {
	c := len(s.y)
	if s.cols == nil {
		back := make([]float64, s.d*c)
		s.cols = make([][]float64, s.d)
		for j := range s.cols {
			s.cols[j] = back[j*c : (j+1)*c : (j+1)*c]
		}
	}
	for i := range c {
		row := s.rows[i*s.d : (i+1)*s.d]
		for j, v := range row {
			s.cols[j][i] = v
		}
	}
	return s.cols
}

// reference builds a window.ShiftReference from the sample (default bins)
// and sets it; it allocates and runs at warm-up and re-takes only.
func (s *featureSample) reference() *window.ShiftReference {
	ref := window.NewShiftReference(s.columns(), 0)
	s.setReference(ref)
	return ref
}

// setReference bins every stored value against ref's edges from now on.
func (s *featureSample) setReference(ref *window.ShiftReference) {
	if ref.Features() != s.d {
		panic("pipeline: featureSample: reference width differs from the sample")
	}
	s.ref, s.bins = ref, ref.Bins()
	if s.bins > binMissing {
		panic("pipeline: featureSample: too many bins")
	}
	s.edges = s.edges[:0]
	s.searched = s.searched[:0]
	for j := range s.d {
		e := ref.Edges(j)
		s.edges = append(s.edges, e)
		s.searched = append(s.searched, !finiteAscending(e))
	}
	if len(s.counts) != s.d*s.bins {
		s.counts = make([]int32, s.d*s.bins)
	}
	clear(s.counts)
	clear(s.slotBin)
	for i := range s.n {
		s.rebin(i*s.d, false)
	}
	if len(s.fracs) != s.bins {
		s.fracs = make([]float64, s.bins)
	}
}

// compare measures every feature of the sample against the reference,
// as window.ShiftReference.Compare(s.columns(), dst) would on a full
// sample (the watch compares only full ones), and returns the shifts
// appended to dst[:0]. It does not allocate once dst has room for every
// feature; it panics without a reference.
func (s *featureSample) compare(dst []window.FeatureShift) []window.FeatureShift {
	ref := s.ref
	sums := s.sums[:s.d]
	clear(sums)
	for i := range s.n {
		row := s.rows[i*s.d : (i+1)*s.d]
		row = row[:len(sums)]
		for j, v := range row {
			if v-v == 0 {
				sums[j] += v
			}
		}
	}
	dst = dst[:0]
	for j := range s.d {
		fs := window.FeatureShift{Feature: j}
		c := s.counts[j*s.bins : (j+1)*s.bins]
		var n int32
		for _, k := range c {
			n += k
		}
		if n > 0 && ref.Count(j) > 0 {
			for i, k := range c {
				s.fracs[i] = float64(k) / float64(n)
			}
			if sd := ref.Std(j); sd > 0 {
				fs.MeanShift = (sums[j]/float64(n) - ref.Mean(j)) / sd
			}
			fs.PSI = window.PSI(s.fracs, ref.Fractions(j))
		}
		dst = append(dst, fs)
	}
	return dst
}
