package pipeline

import (
	"fmt"
	"math"
	"strconv"

	"lariat/config"
	"lariat/daemon/record"
)

// guard is the plausibility check a record passes before it reaches the
// model (config.Guard). Its rules:
//
// Configured bounds. A channel named in guard.bounds, or the label of a
// squared-loss model with guard.label, outside its [min, max] rejects the
// record with reason out_of_range, however often it comes; the check keeps
// no state. A bounded channel is not checked by the sd guard.
//
// The sd guard. Every other channel, and the label of a squared-loss
// model, keeps a mean μ and a population variance v of its accepted values,
// exponentially weighted with a half-life of window.records values
// (West 1979's weighted update, μ += αδ, v = (1−α)(v + αδ²) with
// δ = x − μ; α = max(1/(n+1), 1 − 2^(−1/h)), so the first values get the
// exact running mean and variance of Welford 1962). The window's own mean
// and standard deviation would do as well for a channel present in every
// record, but a channel that is missing from most records has its missing
// values imputed with the mean there, which shrinks its window standard
// deviation by √(present fraction) and would make ordinary values look
// extreme; these statistics see only the values a channel actually sent.
// Once a channel holds guard.warm accepted values, a value x with
// |x − μ| > guard.sd·√v rejects the record with reason implausible.
//
// A new level is not locked out. A real step change (a setpoint moved, a
// pump started, a channel that sat at exactly one value) may lie far
// outside the old spread. Two things let it in: first, μ and v move with
// every accepted value, so a level that is accepted at all is no longer
// extreme after a value or two (one accepted value at distance Δ makes the
// standard deviation about Δ·√α, so the next one is about 1/√α ≈ 120
// standard deviations out for the default window, inside the default
// guard.sd of 1000); second, a channel whose values the guard rejected
// guard.persist times in a row, all on the same side of μ, is taken to be
// at a new level, and its next values on that side are accepted (and move
// μ and v) for as long as the run lasts. A single wild value (1e29 where
// 300 is usual), or any number of them between ordinary values, stays
// out; a failed sensor stuck at a sentinel value costs guard.persist
// records and is then learned (the data drift alert reports the shift), so
// one broken channel cannot stop a model for good. Values that are never
// valid however often they come belong in guard.bounds.
//
// A rejected record never touches the model: the ladder, the window, the
// held-out ring, the drift watch and the tuner are unchanged, and so are
// μ, v and the counts; only the run lengths of the guard itself move.
type guard struct {
	sd      float64 // guard.sd; 0 = off
	sd2     float64 // sd²
	warm    uint64
	persist int64 // 0 = a run never lets values in
	alpha   float64
	bounds  map[string]config.Bound // by channel name; nil without any
	label   config.Range            // squared loss only
	labelSD bool                    // the sd guard checks the label (squared loss)

	cols  []gstat  // per column of the records
	y     gstat    // the label
	names []string // the names cols were resolved for
}

// gstat is what the guard keeps of one channel (or of the label).
type gstat struct {
	n      uint64  // accepted values, saturating
	run    int64   // consecutive sd rejections: > 0 above μ, < 0 below
	mean   float64 // μ
	vr     float64 // v, the population variance
	lo, hi float64 // configured bounds, ±Inf when unset
	fixed  bool    // configured bounds replace the sd guard
}

// learnerLimit is the largest magnitude the learner takes (online's
// input bound, 1e50): a value beyond it, or infinite, is the learner's to
// reject (reason not_finite), so the guard leaves it alone and the reason
// says what is wrong with it. TestGuardLeavesHugeToLearner checks the two
// agree.
const learnerLimit = 1e50

// newGuard returns the guard of model m, dim columns wide.
func newGuard(m *config.Model, dim int) *guard {
	g := &guard{
		sd:      m.Guard.SD,
		sd2:     m.Guard.SD * m.Guard.SD,
		warm:    uint64(max(m.Guard.Warm, 1)),
		persist: int64(m.Guard.Persist),
		alpha:   -math.Expm1(-math.Ln2 / float64(max(m.Window.Records, 1))),
		labelSD: !m.Logistic(),
	}
	if !m.Logistic() {
		g.label = m.Guard.Label
	}
	if len(m.Guard.Bounds) > 0 {
		g.bounds = make(map[string]config.Bound, len(m.Guard.Bounds))
		for _, b := range m.Guard.Bounds {
			g.bounds[b.Feature] = b
		}
	}
	g.y = gstat{lo: g.label.Min.Lo(), hi: g.label.Max.Hi(), fixed: g.label.Min.Set || g.label.Max.Set}
	g.grow(dim)
	return g
}

// grow widens the guard to n columns (new columns are cold and unbounded
// until resolve names them).
func (g *guard) grow(n int) {
	for len(g.cols) < n {
		g.cols = append(g.cols, gstat{lo: math.Inf(-1), hi: math.Inf(1)})
	}
}

// resolve follows the feature names: a column that got a name gets its
// configured bounds, and a column whose name changed (a slot given to
// another channel) starts cold. names only grows by appending (the
// decoder's contract), so the usual case costs one comparison.
func (g *guard) resolve(names []string) {
	old := g.names
	if len(names) == len(old) && (len(names) == 0 || &names[0] == &old[0]) {
		return
	}
	g.grow(len(names))
	start := 0
	if len(old) > 0 && len(names) >= len(old) && &names[0] == &old[0] {
		start = len(old) // appended only
	}
	for j := start; j < len(names); j++ {
		c := &g.cols[j]
		if j < len(old) && old[j] == names[j] {
			continue
		}
		*c = gstat{lo: math.Inf(-1), hi: math.Inf(1)}
		if b, ok := g.bounds[names[j]]; ok {
			c.lo, c.hi, c.fixed = b.Min.Lo(), b.Max.Hi(), true
		}
	}
	g.names = names
}

// check decides whether a record with features x (NaN = missing) and label
// y is plausible; names are the column names. It returns nil, or the
// *record.Error to reject it with. A record rejected for a configured bound
// changes nothing; otherwise the run lengths of the sd guard move (and only
// they). It does not allocate unless it rejects.
func (g *guard) check(x []float64, y float64, names []string) error {
	g.resolve(names)
	g.grow(len(x))
	for j, v := range x {
		if g.bounds == nil {
			break // no channel has bounds
		}
		if c := &g.cols[j]; c.fixed && (v < c.lo || v > c.hi) {
			return g.outOfRange(name(names, j), v, c)
		}
	}
	if g.y.fixed && (y < g.y.lo || y > g.y.hi) {
		return g.outOfRange("the label", y, &g.y)
	}
	if g.sd == 0 {
		return nil
	}
	bad, badV := -1, 0.0
	for j, v := range x {
		if !(math.Abs(v) <= learnerLimit) {
			continue // missing (NaN), or the learner's to refuse
		}
		if c := &g.cols[j]; !c.fixed && !g.step(c, v) && bad < 0 {
			bad, badV = j, v
		}
	}
	badY := g.labelSD && !g.y.fixed && math.Abs(y) <= learnerLimit && !g.step(&g.y, y)
	switch {
	case bad >= 0:
		return g.implausible(name(names, bad), badV, &g.cols[bad])
	case badY:
		return g.implausible("the label", y, &g.y)
	}
	return nil
}

// step applies the sd guard to value v of a channel and moves its run
// length; it reports whether v passes.
func (g *guard) step(c *gstat, v float64) bool {
	// |v − μ| > sd·√v, squared: no square root per value (|v|, |μ| ≤
	// 1e50, so the squares stay finite).
	if d := v - c.mean; c.n < g.warm || !(d*d > g.sd2*c.vr) {
		c.run = 0
		return true
	}
	switch {
	case v > c.mean && c.run >= 0:
		c.run++
	case v < c.mean && c.run <= 0:
		c.run--
	default:
		c.run = int64(math.Copysign(1, v-c.mean)) // the run changed sides
	}
	return g.persist > 0 && abs64(c.run) > g.persist
}

// learn adds an accepted record's values to the statistics of the sd guard.
func (g *guard) learn(x []float64, y float64) {
	if g.sd == 0 {
		return
	}
	for j, v := range x {
		if v != v {
			continue // missing
		}
		if c := &g.cols[j]; !c.fixed {
			g.add(c, v)
		}
	}
	if g.labelSD && !g.y.fixed && y == y {
		g.add(&g.y, y)
	}
}

// add folds v into c's exponentially weighted mean and variance.
func (g *guard) add(c *gstat, v float64) {
	a := max(1/float64(c.n+1), g.alpha)
	d := v - c.mean
	c.mean += a * d
	c.vr = (1 - a) * (c.vr + a*d*d)
	if c.n < math.MaxUint64 {
		c.n++
	}
}

// outOfRange is the rejection of a value outside its configured bounds.
func (g *guard) outOfRange(what string, v float64, c *gstat) error {
	return &record.Error{Reason: record.ReasonOutOfRange,
		Detail: fmt.Sprintf("%s is %g, outside its bounds [%g, %g]", what, v, c.lo, c.hi)}
}

// implausible is the rejection of the sd guard.
func (g *guard) implausible(what string, v float64, c *gstat) error {
	sd := math.Sqrt(c.vr)
	return &record.Error{Reason: record.ReasonImplausible,
		Detail: fmt.Sprintf("%s is %g, %.3g standard deviations from its recent mean %g (guard.sd %g)",
			what, v, math.Abs(v-c.mean)/sd, c.mean, g.sd)}
}

// name returns "channel <quoted name>" for column j, the name cut to 40
// bytes.
func name(names []string, j int) string {
	if j >= len(names) {
		return "column " + strconv.Itoa(j)
	}
	s := names[j]
	if len(s) > 40 {
		return "channel " + strconv.Quote(s[:40]) + "..."
	}
	return "channel " + strconv.Quote(s)
}

func abs64(v int64) int64 {
	if v < 0 {
		return -v
	}
	return v
}

// marshal writes the guard's state: per column and for the label, the
// count, the run length, μ and v (the configured bounds come from the
// configuration and the names).
func (g *guard) marshal(e enc) {
	e.uvarint(uint64(len(g.cols)))
	for i := range g.cols {
		g.cols[i].marshal(e)
	}
	g.y.marshal(e)
}

func (c *gstat) marshal(e enc) {
	e.uvarint(c.n)
	e.int64(c.run)
	e.f64(c.mean)
	e.f64(c.vr)
}

// restore reads what marshal wrote, for a pipeline dim columns wide whose
// feature names are names.
func (g *guard) restore(d dec, dim int, names []string) {
	n := d.uvarint()
	if d.failed() {
		return
	}
	if n > uint64(dim) {
		d.fail("guard of %d columns, the model has %d", n, dim)
		return
	}
	g.resolve(names)
	g.grow(int(n))
	for i := range int(n) {
		g.cols[i].restore(d)
	}
	g.y.restore(d)
}

func (c *gstat) restore(d dec) {
	c.n = d.uvarint()
	c.run = d.int64()
	c.mean = d.f64()
	c.vr = d.f64()
}
