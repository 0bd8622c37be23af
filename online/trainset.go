package online

import (
	"math"

	"lariat/window"
)

// refreshEvery is the number of arrivals between two refreshes of the
// working scale (μ, 1/s) that the SAGA steps standardize with. A refresh
// costs d square roots and divisions, so doing it for every record would
// dominate the cost of a record at K = 1; between refreshes the steps
// optimize the objective on a scale at most refreshEvery records old, and
// Idle, Converge and resync refresh first.
const refreshEvery = 32

// meta is what the ring keeps per record; the features live in trainset.x.
type meta struct {
	y, w float64
	t    int64
}

// trainset is the train window shared by every SAGA member: the records in
// arrival order (a window.Ring of labels and weights, the features in a
// flat slot-indexed array of float64), the exact running scaler, the
// working scale the steps use, and the pieces of the smoothness bound.
type trainset struct {
	d    int
	ring *window.Ring[meta]
	x    []float64 // Cap·d: row of slot s at x[s·d:(s+1)·d]
	sc   scaler    // exact running scale of the window

	mu, sd, inv []float64 // working scale (inv = 0 for constant features)
	since       int       // arrivals since the working scale was refreshed

	// Smoothness bound (see bound). The reference scale is the exact scale
	// at the last resync; maxW and maxWA2 are running maxima, since that
	// resync, of w and w·‖x standardized with the reference scale‖².
	refMu, refInv []float64
	maxW, maxWA2  float64
	rmax, mnorm   float64 // max_j s_ref_j/s_j and ‖(μ_ref − μ)/s‖ at the last refresh
	atRefresh     float64 // bound on w‖x̃‖² of the records in the window at the last refresh
	sinceMax      float64 // max of w‖x̃‖² (working scale) of the arrivals since
	dref, dunref  int     // non-constant features with / without a reference scale
	arrivals      int     // since the last resync
	resyncLen     int     // window length at the last resync
	boundAtResync float64 // max_i w_i‖x̃_i‖² at the last resync
	slots         []int   // scratch: slots in window order
}

func newTrainset(d, capacity int) *trainset {
	mk := func() []float64 { return make([]float64, d) }
	return &trainset{
		d: d, ring: window.NewRing[meta](capacity), x: make([]float64, capacity*d),
		sc: newScaler(d), mu: mk(), sd: mk(), inv: mk(), refMu: mk(), refInv: mk(),
		slots: make([]int, capacity),
	}
}

// row returns the features of the record in slot s.
func (ts *trainset) row(s int) []float64 { return ts.x[s*ts.d : (s+1)*ts.d : (s+1)*ts.d] }

// push appends a record (the ring must not be full) and returns its slot.
// The caller stores x in the slot's row (sagaLearner.run or settle). sqRef and
// sqWork are ‖x‖² standardized with the reference and the working scale
// (kernel stdPrep).
func (ts *trainset) push(x []float64, y, w float64, t int64, sqRef, sqWork float64) int {
	ts.ring.Push(meta{y: y, w: w, t: t})
	s := ts.ring.Slot(ts.ring.Len() - 1)
	ts.sc.add(x, w, y)
	ts.place(w, sqRef, sqWork)
	return s
}

// replace evicts the oldest record of the full ring and puts the new one in
// its slot, leaving the old row in place until the caller has folded it out
// of the members' sums and stores x over it (sagaLearner.run or settle). The
// scaler swaps the records in one pass (scaler.swap). sqRef and sqWork are
// as for push.
func (ts *trainset) replace(x []float64, y, w float64, t int64, sqRef, sqWork float64) {
	m, _ := ts.ring.Oldest()
	s := ts.ring.Slot(0)
	if ts.ring.Len() == 1 {
		ts.sc.reset()
		ts.sc.add(x, w, y)
	} else {
		ts.sc.swap(ts.row(s), m.w, m.y, x, w, y)
	}
	ts.ring.Push(meta{y: y, w: w, t: t}) // full: the new record takes slot s
	ts.place(w, sqRef, sqWork)
}

// place updates the maxima of the smoothness bound for an arrival of weight
// w and squared standardized norms sqRef and sqWork.
func (ts *trainset) place(w, sqRef, sqWork float64) {
	ts.maxW = max(ts.maxW, w)
	ts.maxWA2 = max(ts.maxWA2, w*sqRef)
	ts.sinceMax = max(ts.sinceMax, w*sqWork)
	ts.arrivals++
	ts.since++
}

// pop removes the oldest record from the ring and the scaler. The caller
// has already taken it out of the members' sums.
func (ts *trainset) pop() {
	m, _ := ts.ring.Oldest()
	x := ts.row(ts.ring.Slot(0))
	ts.ring.PopOldest()
	if ts.ring.Len() == 0 {
		ts.sc.reset()
		return
	}
	ts.sc.remove(x, m.w, m.y)
}

// refresh copies the exact running scale into the working scale and
// recomputes the factors of the smoothness bound.
func (ts *trainset) refresh() {
	ts.rmax, ts.dref, ts.dunref = 0, 0, 0
	var m2 float64
	for j := range ts.mu {
		ts.mu[j] = ts.sc.mean[j]
		ts.sd[j], ts.inv[j] = ts.sc.scale(j)
		switch {
		case ts.inv[j] == 0:
		case ts.refInv[j] == 0:
			ts.dunref++
		default:
			ts.dref++
			ts.rmax = max(ts.rmax, ts.inv[j]/ts.refInv[j])
			m := (ts.refMu[j] - ts.mu[j]) * ts.inv[j]
			m2 += m * m
		}
	}
	ts.mnorm = math.Sqrt(m2)
	ts.since = 0
	w := ts.sc.w
	a := ts.rmax*math.Sqrt(ts.maxWA2) + ts.mnorm*math.Sqrt(ts.maxW)
	ts.atRefresh = min(a*a, w*float64(ts.dref)) + w*float64(ts.dunref)
	ts.sinceMax = 0
}

// bound returns an upper bound on max_i w_i‖x̃_i‖² over the window, x̃
// standardized with the working scale. For the records that arrived since
// the last refresh it is their exact maximum (sinceMax). For the records
// present at that refresh, when the working scale was the exact scale of
// the window, it is atRefresh, computed there in two ways and the smaller
// kept: (1) with r = max_j s_ref_j/s_j and m = (μ_ref − μ)/s,
// x̃ = diag(s_ref/s)·x̃_ref + m, so ‖x̃_i‖ ≤ r‖x̃_ref,i‖ + ‖m‖ (triangle
// inequality) and w_i‖x̃_i‖² ≤ (r·√maxWA2 + ‖m‖·√maxW)², the maxima running
// over every record since the resync (a superset of the window); (2) with
// the exact scale Σ_i w_i x̃_ij² = W for every feature, so w_i x̃_ij² ≤ W and
// w_i‖x̃_i‖² ≤ W·d. Features that were constant at the reference (no
// reference scale) add their W. Evictions only remove records, so the bound
// stays valid until the next refresh. Right after a resync r = 1, m = 0 and
// the bound is exact for unit weights.
func (ts *trainset) bound() float64 { return max(ts.atRefresh, ts.sinceMax) }

// lipschitz returns the smoothness constant L of the per-record parts of
// F written as (1/n) Σ f_i with f_i = (w_i/w̄)·ℓ(y_i, b + x̃_iᵀθ), w̄ = W/n:
// the Hessian of f_i is (w_i/w̄)·ℓ”·(1, x̃_i)(1, x̃_i)ᵀ, whose largest
// eigenvalue is (w_i/w̄)·ℓ”·(1 + ‖x̃_i‖²) ≤ curv·(w_i + w_i‖x̃_i‖²)/w̄. SAGA
// with uniform sampling needs the maximum of these over i, not their mean:
// the mean of ‖x̃_i‖² is d for standardized data, but a single record can
// reach n·d, so curv·(1 + d) is not a safe step bound (Defazio, Bach &
// Lacoste-Julien 2014, Theorem 1, step 1/(3L) with L the max).
func (ts *trainset) lipschitz(curv float64) float64 {
	n := ts.ring.Len()
	if n == 0 || !(ts.sc.w > 0) {
		return curv
	}
	wbar := ts.sc.w / float64(n)
	return curv * (ts.maxW + ts.bound()) / wbar
}

// order fills ts.slots with the slots of the window, oldest first.
func (ts *trainset) order() []int {
	n := ts.ring.Len()
	for i := range n {
		ts.slots[i] = ts.ring.Slot(i)
	}
	return ts.slots[:n]
}

// recompute rebuilds the scaler from the stored records (two passes), sets
// the reference scale to the result and recomputes the maxima of the
// smoothness bound exactly; it then refreshes the working scale.
func (ts *trainset) recompute() {
	slots := ts.order()
	ts.sc.recompute(len(slots),
		func(i int) []float64 { return ts.row(slots[i]) },
		func(i int) (y, w float64) { m := ts.ring.At(i); return m.y, m.w })
	for j := range ts.refMu {
		ts.refMu[j] = ts.sc.mean[j]
		_, ts.refInv[j] = ts.sc.scale(j)
	}
	ts.maxW, ts.maxWA2 = 0, 0
	for i, s := range slots {
		w := ts.ring.At(i).w
		ts.maxW = max(ts.maxW, w)
		ts.maxWA2 = max(ts.maxWA2, w*stdSq(ts.row(s), ts.refMu, ts.refInv))
	}
	ts.arrivals, ts.resyncLen = 0, len(slots)
	ts.refresh()
	ts.boundAtResync = ts.bound()
}

// resyncEvery is the number of window lengths of arrivals between two
// scheduled resyncs once the window holds 64 records or more (below that,
// one window length, so the scale settles fast while the window fills).
// A resync costs O(n·d·K); at one per four window lengths it adds about a
// quarter of an axpy per member per record.
const resyncEvery = 4

// resyncDue reports whether the scheduled exact recompute is due.
func (ts *trainset) resyncDue() bool {
	k := 1
	if ts.resyncLen >= 64 {
		k = resyncEvery
	}
	return ts.arrivals >= k*max(1, ts.resyncLen)
}
