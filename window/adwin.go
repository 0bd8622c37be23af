package window

import "math"

// Defaults of ADWINOptions. M = 5 buckets per row is the value Bifet &
// Gavaldà (2007) use for ADWIN2; δ = 0.002 is a common choice in their
// experiments (value from memory; common practice, no single source). A
// check every 32 inserts is our own choice: it bounds the cost of the cut
// test per value (see the benchmarks) for a few tens of records of delay.
const (
	DefaultADWINDelta   = 0.002
	DefaultADWINBuckets = 5
	DefaultADWINClock   = 32
)

// adwinRows bounds the rows of the exponential histogram: row r holds
// buckets of 2^r records, so 64 rows cover any int width.
const adwinRows = 64

// ADWINOptions configures an ADWIN; nil or the zero value gives the
// defaults shown.
type ADWINOptions struct {
	// Delta is the confidence δ in (0, 1): the bound on the probability of
	// a false cut per check. Default 0.002.
	Delta float64
	// Buckets is M, the most buckets kept per row of the exponential
	// histogram; larger M gives finer cut points and more memory
	// (M·log2(W/M) buckets). Default 5.
	Buckets int
	// Clock is the number of inserts between two cut checks; it bounds the
	// cost per record and delays detection by at most Clock−1 records.
	// Default 32; 1 checks after every insert as in the paper.
	Clock int
	// Range is the width of the interval the values lie in, which scales
	// the Bernstein term of the cut bound. Default 1 (values in [0, 1], as
	// the paper assumes); the δ guarantee holds only for values in an
	// interval of this width.
	Range float64
}

// ADWIN is the adaptive windowing change detector of Bifet & Gavaldà
// (2007), "Learning from time-changing data with adaptive windowing", SDM,
// in its ADWIN2 form: the window W of recent values is stored as an
// exponential histogram (rows of at most M buckets of 2^r values, each
// holding its sum and its sum of squared deviations). Memory is fixed at
// construction (64 rows of M+1 buckets, enough for any width) and a check
// costs O(M log W).
//
// Every Clock inserts, ADWIN compares every split W = W0·W1 at a bucket
// boundary (W0 older) and drops the oldest bucket while some split has
//
//	|μ̂0 − μ̂1| > ε = sqrt(2/m · σ²_W · ln(2/δ')) + 2R/(3m) · ln(2/δ'),
//
// with m = 1/(1/n0 + 1/n1), σ²_W the variance of W, δ' = δ/ln(n) and
// n = |W| (the paper's variance-based bound for ADWIN2; R is Range).
// Add reports a change when it dropped records.
//
// Known limitation: the guarantee assumes independent values in an
// interval of width Range; heavy-tailed values (an unbounded loss) make
// false alarms more likely than δ.
type ADWIN struct {
	delta float64
	m     int // buckets per row (M)
	clock int
	rng   float64

	rows int            // rows in use
	cnt  [adwinRows]int // buckets in each row
	sum  []float64      // [r*(m+1)+i]: sum of bucket i of row r (i = 0 oldest)
	m2   []float64      // same layout: sum of squared deviations from the bucket mean
	n    int            // width |W|
	tot  float64        // sum of W
	v    float64        // sum of squared deviations of W
	tick int            // inserts since the last check
	drop int            // records dropped at the last change
}

// NewADWIN returns an ADWIN with confidence delta (default 0.002 when
// delta <= 0 or >= 1) and the other defaults of ADWINOptions.
func NewADWIN(delta float64) *ADWIN {
	return NewADWINOptions(&ADWINOptions{Delta: delta})
}

// NewADWINOptions returns an ADWIN configured by o; nil means all
// defaults, and each field outside its valid range takes its default.
func NewADWINOptions(o *ADWINOptions) *ADWIN {
	var opt ADWINOptions
	if o != nil {
		opt = *o
	}
	if !(opt.Delta > 0 && opt.Delta < 1) {
		opt.Delta = DefaultADWINDelta
	}
	if opt.Buckets < 1 {
		opt.Buckets = DefaultADWINBuckets
	}
	if opt.Clock < 1 {
		opt.Clock = DefaultADWINClock
	}
	if !(opt.Range > 0) || math.IsInf(opt.Range, 0) {
		opt.Range = 1
	}
	k := adwinRows * (opt.Buckets + 1)
	return &ADWIN{
		delta: opt.Delta,
		m:     opt.Buckets,
		clock: opt.Clock,
		rng:   opt.Range,
		sum:   make([]float64, k),
		m2:    make([]float64, k),
	}
}

// Add inserts x as the newest value and reports whether a change was
// detected (the window was cut). A NaN or infinite x is ignored and
// reports false. Add does not allocate.
func (a *ADWIN) Add(x float64) (change bool) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return false
	}
	if a.n > 0 {
		d := x - a.tot/float64(a.n)
		a.v += float64(a.n) / float64(a.n+1) * d * d
	}
	a.n++
	a.tot += x
	a.insert(x)
	a.tick++
	if a.tick < a.clock {
		return false
	}
	a.tick = 0
	return a.check()
}

// insert appends a one-value bucket to row 0 and merges the two oldest
// buckets of any row that holds more than M.
func (a *ADWIN) insert(x float64) {
	w := a.m + 1
	if a.rows == 0 {
		a.rows = 1
	}
	a.sum[a.cnt[0]] = x
	a.m2[a.cnt[0]] = 0
	a.cnt[0]++
	for r := 0; a.cnt[r] > a.m; r++ {
		i := r * w
		size := float64(uint64(1) << r) // records per bucket in row r
		s0, s1 := a.sum[i], a.sum[i+1]
		d := (s0 - s1) / size // μ0 − μ1
		s := s0 + s1
		v := a.m2[i] + a.m2[i+1] + size/2*d*d // Chan et al. pairwise update with n0 = n1 = size
		a.shift(r, 2)
		if r+1 == a.rows {
			a.rows++
		}
		j := (r+1)*w + a.cnt[r+1]
		a.sum[j], a.m2[j] = s, v
		a.cnt[r+1]++
	}
}

// shift removes the k oldest buckets of row r.
func (a *ADWIN) shift(r, k int) {
	i := r * (a.m + 1)
	c := a.cnt[r]
	copy(a.sum[i:i+c-k], a.sum[i+k:i+c])
	copy(a.m2[i:i+c-k], a.m2[i+k:i+c])
	a.cnt[r] = c - k
}

// check drops the oldest bucket while some split shows a significant
// difference of means, and reports whether it dropped any.
func (a *ADWIN) check() bool {
	a.resync()
	dropped := 0
	for a.n >= 2 && a.cut() {
		r := a.rows - 1
		i := r * (a.m + 1)
		nb := float64(uint64(1) << r)
		a.remove(nb, a.sum[i], a.m2[i])
		a.shift(r, 1)
		// With M = 1 a merge can empty a row below the top, so drop every
		// empty top row (with M >= 2 only rows at the top are ever empty).
		for a.rows > 0 && a.cnt[a.rows-1] == 0 {
			a.rows--
		}
		dropped += 1 << r
	}
	if dropped == 0 {
		return false
	}
	a.drop = dropped
	return true
}

// remove takes a bucket of nb values with sum s and squared deviations v
// out of the window totals (the pairwise update of Chan et al. in reverse).
func (a *ADWIN) remove(nb, s, v float64) {
	n := float64(a.n)
	rest := n - nb
	a.n -= int(nb)
	if a.n == 0 {
		a.tot, a.v = 0, 0
		return
	}
	d := s/nb - (a.tot-s)/rest
	a.tot -= s
	a.v = max(a.v-v-nb*rest/n*d*d, 0)
}

// cut reports whether some split of W at a bucket boundary has
// |μ̂0 − μ̂1| > ε (see the type's doc comment).
//
// With P = n0·n1, 1/m = n/P and μ̂0 − μ̂1 = (s0·n1 − s1·n0)/P, the test
// |μ̂0 − μ̂1| > sqrt(c1/m) + c2/m, with c1 = 2σ²·ln(2/δ') and
// c2 = (2R/3)·ln(2/δ'), is multiplied through by P and squared:
// g = |s0·n1 − s1·n0| − c2·n > 0 and g² > c1·n·P. This needs no division
// and no square root per split.
func (a *ADWIN) cut() bool {
	n := float64(a.n)
	lnd := math.Log(2 * math.Log(n) / a.delta) // ln(2/δ'), δ' = δ/ln n
	c1n := 2 * (a.v / n) * lnd * n
	c2n := 2.0 / 3 * a.rng * lnd * n
	var n0, s0 float64
	for r := a.rows - 1; r >= 0; r-- {
		size := float64(uint64(1) << r)
		i := r * (a.m + 1)
		for b := range a.cnt[r] {
			n0 += size
			s0 += a.sum[i+b]
			n1 := n - n0
			if n1 == 0 {
				return false
			}
			g := math.Abs(s0*n1-(a.tot-s0)*n0) - c2n
			if g > 0 && g*g > c1n*n0*n1 {
				return true
			}
		}
	}
	return false
}

// resync recomputes the window sum and squared deviations from the
// buckets, so rounding in the incremental updates cannot accumulate.
func (a *ADWIN) resync() {
	var tot float64
	for r := range a.rows {
		i := r * (a.m + 1)
		for b := range a.cnt[r] {
			tot += a.sum[i+b]
		}
	}
	mean := tot / float64(a.n)
	var v float64
	for r := range a.rows {
		size := float64(uint64(1) << r)
		i := r * (a.m + 1)
		for b := range a.cnt[r] {
			d := a.sum[i+b]/size - mean
			v += a.m2[i+b] + size*d*d
		}
	}
	a.tot, a.v = tot, v
}

// Width returns the number of values in the window.
func (a *ADWIN) Width() int { return a.n }

// Mean returns the mean of the window (0 when empty).
func (a *ADWIN) Mean() float64 {
	if a.n == 0 {
		return 0
	}
	return a.tot / float64(a.n)
}

// Variance returns the population variance of the window (0 when empty).
func (a *ADWIN) Variance() float64 {
	if a.n == 0 {
		return 0
	}
	return a.v / float64(a.n)
}

// Dropped returns the number of values dropped at the last detected change
// (0 before the first).
func (a *ADWIN) Dropped() int { return a.drop }

// Delta returns the confidence δ in use.
func (a *ADWIN) Delta() float64 { return a.delta }

// Reset empties the window and forgets Dropped, keeping the options.
func (a *ADWIN) Reset() {
	a.rows = 0
	a.cnt = [adwinRows]int{}
	a.n, a.tot, a.v, a.tick, a.drop = 0, 0, 0, 0, 0
}
