package online

import (
	"fmt"
	"time"

	"lariat/window"
)

// MarshalBinary returns the whole state of the ladder: its options (the
// loss by name), the λ grid and λ_max, the counters, and the learner's
// state, so that a ladder restored with UnmarshalLadder continues
// bit-identically: the same records, Idle, Shrink and Converge calls
// afterwards give the same coefficients, grid, scores and KKT values as
// this ladder would (on a machine that takes the same arithmetic path,
// see the kernels). For the SAGA learner that is the train window (the
// records in their ring slots, each with its gradient per member), the
// exact running scaler, the working and reference scales and the pieces
// of the step-size bound, every member's coefficients, sums, step
// constants and pending step, and the state of the PCG generator; for the
// decay learner every member's FTRL-Proximal accumulators and the
// exponentially weighted scale; for the gram learner the train window, the
// shift and the sums bit for bit, the rebuild and solve bookkeeping and the
// members. Scratch buffers are not saved.
//
// A ladder with a Loss other than Squared or Logistic cannot be saved:
// MarshalBinary returns an error wrapping ErrState. The format is
// described in UnmarshalLadder.
func (l *Ladder) MarshalBinary() ([]byte, error) {
	name, err := lossName(l.opt.Loss)
	if err != nil {
		return nil, err
	}
	e := window.NewEncoder(nil)
	if s, ok := l.lrn.(*sagaLearner); ok {
		e = window.NewEncoder(make([]byte, 0, 256+8*16*l.d+len(l.lambdas)*8*(2*l.d+16)+s.ts.ring.Len()*(8*(l.d+3+s.k)+2)))
	}
	putHeader(e, stateLadder)
	o := &l.opt
	putString(e, name)
	e.PutFloat64(o.Penalty.Mix)
	e.PutUvarint(uint64(l.d))
	e.PutUvarint(uint64(o.MaxFeatures))
	e.PutUvarint(uint64(o.Window))
	e.PutVarint(int64(o.Span))
	e.PutUvarint(uint64(o.Size))
	e.PutFloat64(o.Floor)
	e.PutFloat64(o.Lambda)
	e.PutUvarint(uint64(o.Steps))
	e.PutUvarint(o.Seed)
	putString(e, o.Learner)
	e.PutFloat64(o.HalfLife)
	e.PutBool(o.Unpenalized)
	e.PutUvarint(l.seen)
	e.PutFloat64(l.lmax)
	e.PutFloat64(l.anchor)
	e.PutFloat64s(l.lambdas)
	for _, f := range l.fresh {
		e.PutBool(f)
	}
	g := &l.grid
	e.PutFloat64(g.ratio)
	e.PutUvarint(uint64(g.ext))
	e.PutFloat64(g.df[0])
	e.PutFloat64(g.df[1])
	e.PutUvarint(uint64(g.rank))
	e.PutUvarint(g.specAt)
	e.PutUvarint(uint64(g.specLen))
	e.PutBool(g.respec)
	switch lrn := l.lrn.(type) {
	case *sagaLearner:
		if err := lrn.encode(e); err != nil {
			return nil, err
		}
	case *decayLearner:
		lrn.encode(e)
	case *covLearner:
		lrn.encode(e)
	}
	return e.Bytes(), nil
}

// UnmarshalLadder returns the ladder whose state MarshalBinary saved in b.
// Any defect (truncation, trailing bytes, an unknown version, sizes that
// do not fit together or exceed the bounds of a restore) returns an error
// wrapping ErrState; no input makes it panic, and it allocates only the
// buffers of the ladder that b describes.
//
// The format, version 5, written with window.Encoder: the version byte 5
// (4 is read too, see stateVersion) and the type byte 'L'; the options (loss name, penalty mix, features
// (the current width, see Grow), max features, window, span in
// nanoseconds, size, floor, fixed λ, steps, seed, learner name,
// half-life, unpenalized); the records seen, λ_max, the anchor of the grid and the
// grid; one bool per feature, set for a fresh column (see Grow); the grid's placement (the ratio of its anchored
// bottom to its top, the extension, the two degrees of freedom and the
// rank of a ridge anchor, the records seen and the window length at the
// last spectrum, and whether a spectrum is due); then the learner's state (sagaLearner.encode,
// decayLearner.encode, covLearner.encode). Integers are varints, float64 their little-endian
// IEEE 754 bits, strings, byte strings and float64 slices carry a varint
// length.
func UnmarshalLadder(b []byte) (*Ladder, error) {
	d := window.NewDecoder(b)
	version := header(d, stateLadder)
	opt := decodeOptions(d)
	if d.Err() != nil {
		return nil, stateErr(d.Err())
	}
	l, err := NewLadder(&opt)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrState, err)
	}
	if l.opt.Window != opt.Window || l.opt.Size != opt.Size || l.opt.Steps != opt.Steps || l.opt.MaxFeatures != opt.MaxFeatures ||
		l.opt.Floor != opt.Floor || l.opt.HalfLife != opt.HalfLife {
		return nil, fmt.Errorf("%w: options not in resolved form", ErrState)
	}
	l.seen = d.Uvarint()
	l.lmax, l.anchor = d.Float64(), d.Float64()
	d.Float64sInto(l.lambdas)
	l.nfresh = 0
	for j := range l.fresh {
		if l.fresh[j] = d.Bool(); l.fresh[j] {
			l.nfresh++
		}
	}
	decodeGrid(d, l)
	switch lrn := l.lrn.(type) {
	case *sagaLearner:
		lrn.decode(d, l.xbuf)
	case *decayLearner:
		lrn.decode(d)
	case *covLearner:
		lrn.decode(d, version)
	}
	if err := finish(d); err != nil {
		return nil, err
	}
	return l, nil
}

// decodeGrid reads the grid's placement into l (see UnmarshalLadder) and
// checks that it fits the ladder.
func decodeGrid(d *window.Decoder, l *Ladder) {
	g := &l.grid
	g.ratio = d.Float64()
	ext := d.Count("extension", maxStateSize*64)
	g.df[0], g.df[1] = d.Float64(), d.Float64()
	rank := d.Count("rank", l.d)
	g.specAt = d.Uvarint()
	g.specLen = d.Count("spectrum window", maxStateCap)
	g.respec = d.Bool()
	if d.Err() != nil {
		return
	}
	if !(g.ratio > 0 && g.ratio <= 1) {
		d.Failf("grid ratio %v outside (0, 1]", g.ratio)
	}
	g.ext, g.rank = ext, rank
}

// UnmarshalBinary replaces l, which may be the zero Ladder, by the ladder
// whose state MarshalBinary saved in b (see UnmarshalLadder). On error l
// is unchanged.
func (l *Ladder) UnmarshalBinary(b []byte) error {
	nl, err := UnmarshalLadder(b)
	if err != nil {
		return err
	}
	*l = *nl
	return nil
}

// decodeOptions reads the options and checks that the buffers they call
// for stay within the bounds of a restore, and that the input is long
// enough to hold the members they claim, before anything is allocated.
func decodeOptions(d *window.Decoder) Options {
	name := str(d, 64, "loss")
	mix := d.Float64()
	var o Options
	o.Features = d.Count("features", maxStateFeatures)
	o.MaxFeatures = d.Count("max features", maxStateFeatures)
	o.Window = d.Count("window", maxStateCap)
	o.Span = time.Duration(d.Varint())
	o.Size = d.Count("size", maxStateSize)
	o.Floor, o.Lambda = d.Float64(), d.Float64()
	o.Steps = d.Count("steps", maxStateSteps)
	o.Seed = d.Uvarint()
	o.Learner = str(d, 16, "learner")
	o.HalfLife = d.Float64()
	o.Unpenalized = d.Bool()
	if d.Err() != nil {
		return o
	}
	loss, ok := LossByName(name)
	if !ok {
		d.Failf("unknown loss %q", name)
		return o
	}
	o.Loss, o.Penalty = loss, &Penalty{Mix: mix}
	if o.Features < 1 || o.MaxFeatures < o.Features || o.Window < 1 || o.Size < 1 || o.Steps < 1 || o.Learner == "" {
		d.Failf("features %d (at most %d), window %d, size %d, steps %d, learner %q", o.Features, o.MaxFeatures, o.Window, o.Size, o.Steps, o.Learner)
		return o
	}
	// In int64: the product can exceed a 32-bit int.
	d64, k64 := int64(o.Features), int64(o.Size)
	words, perMember := k64*(2*d64+16), 2*o.Features
	if o.Learner == "decay" {
		words, perMember = k64*(4*d64+8)+12*d64, 4*o.Features
	} else {
		words += int64(o.Window)*(d64+k64+sagaSlotWords) + 12*d64
		if o.Learner == "gram" {
			words += 3 * d64 * d64 // the sums, the Gram matrix and the solver's factor
		}
		if mix < lambdaMixFloor && o.Lambda == 0 && !o.Unpenalized {
			words += d64*d64 + (gramBlock+64)*d64 // the ridge spectrum's scratch (grid.go)
		}
	}
	if words > int64(stateWordLimit) {
		d.Failf("buffers of %d words above %d", words, stateWordLimit)
		return o
	}
	// Each member saves at least perMember float64 (its vectors).
	need(d, o.Size, 8*perMember, "members")
	return o
}

// encode appends the SAGA learner's state: the train window, then the
// learner's scalars and generator, then the members.
func (s *sagaLearner) encode(e *window.Encoder) error {
	s.ts.encode(e, s.ms[0].g, len(s.ms))
	e.PutFloat64(s.gamma)
	e.PutFloat64(s.gkey.maxW)
	e.PutFloat64(s.gkey.bound)
	e.PutFloat64(s.gkey.w)
	e.PutUvarint(uint64(s.gkey.n))
	e.PutFloat64(s.c)
	e.PutFloat64(s.cGamma)
	e.PutFloat64(s.cW)
	e.PutBool(s.pending)
	e.PutBool(s.pfull)
	e.PutUvarint(uint64(s.pslot))
	e.PutVarint(int64(s.first))
	e.PutBool(s.primed)
	if s.pending {
		e.PutFloat64s(s.pend)
	}
	rng, err := s.src.MarshalBinary()
	if err != nil {
		return fmt.Errorf("%w: %w", ErrState, err)
	}
	e.PutBlob(rng)
	e.PutUvarint(uint64(len(s.ms)))
	for _, m := range s.ms {
		e.PutFloat64(m.lambda)
		e.PutFloat64(m.b)
		e.PutFloat64(m.gsum)
		e.PutFloat64(m.thr)
		e.PutFloat64(m.shrink)
		e.PutFloat64(m.eta)
		e.PutFloat64(m.gnew)
		e.PutFloat64(m.gold)
		e.PutFloat64s(m.theta)
		e.PutFloat64s(m.s)
	}
	return nil
}

// decode reads what encode wrote into a learner fresh from newSAGA; xbuf
// is the ladder's record buffer, which a pending admission refers to.
func (s *sagaLearner) decode(d *window.Decoder, xbuf []float64) {
	s.ts.decode(d, s.ms[0].g, s.k)
	s.gamma = d.Float64()
	s.gkey.maxW, s.gkey.bound, s.gkey.w = d.Float64(), d.Float64(), d.Float64()
	s.gkey.n = d.Count("step key length", maxStateCap)
	s.c, s.cGamma, s.cW = d.Float64(), d.Float64(), d.Float64()
	s.pending, s.pfull = d.Bool(), d.Bool()
	s.pslot = d.Count("pending slot", maxStateCap)
	s.first = int(d.Varint())
	s.primed = d.Bool()
	if s.pending {
		s.pend = xbuf
		d.Float64sInto(s.pend)
	}
	rng := blob(d, 64, "generator")
	if d.Err() == nil {
		if err := s.src.UnmarshalBinary(rng); err != nil {
			d.Failf("generator: %v", err)
		}
	}
	if n := d.Count("members", maxStateSize); d.Err() == nil && n != len(s.ms) {
		d.Failf("%d members, want %d", n, len(s.ms))
	}
	for _, m := range s.ms {
		m.lambda, m.b, m.gsum = d.Float64(), d.Float64(), d.Float64()
		m.thr, m.shrink = d.Float64(), d.Float64()
		m.eta, m.gnew, m.gold = d.Float64(), d.Float64(), d.Float64()
		d.Float64sInto(m.theta)
		d.Float64sInto(m.s)
	}
	s.check(d)
}

// check refuses step bookkeeping that would send the next step outside
// the window: a first step is drawn (first ≥ 0) exactly when the members'
// predictors are primed, and a pending admission is the newest record.
func (s *sagaLearner) check(d *window.Decoder) {
	if d.Err() != nil {
		return
	}
	n := s.ts.ring.Len()
	switch {
	case s.primed != (s.first >= 0) || s.first < -1 || s.first >= n:
		d.Failf("first step %d (primed %v) in a window of %d", s.first, s.primed, n)
	case s.pending && (!s.primed || s.pslot != s.ts.ring.Slot(n-1)):
		d.Failf("pending admission in slot %d", s.pslot)
	}
}

// encode appends the window: the ring's head slot and length, each record
// oldest first (label, weight, time, features and the members' gradients),
// the exact scaler, the working scale and the pieces of the step bound.
func (ts *trainset) encode(e *window.Encoder, table []float64, k int) {
	n := ts.ring.Len()
	head := 0
	if n > 0 {
		head = ts.ring.Slot(0)
	}
	e.PutUvarint(uint64(head))
	e.PutUvarint(uint64(n))
	for i := range n {
		r, s := ts.ring.At(i), ts.ring.Slot(i)
		e.PutFloat64(r.y)
		e.PutFloat64(r.w)
		e.PutVarint(r.t)
		e.PutFloat64s(ts.row(s))
		if k > 0 {
			e.PutFloat64s(table[s*k : s*k+k])
		}
	}
	e.PutFloat64(ts.sc.w)
	e.PutFloat64(ts.sc.wy)
	e.PutFloat64s(ts.sc.mean)
	e.PutFloat64s(ts.sc.m2)
	e.PutFloat64s(ts.sc.sxy)
	e.PutFloat64s(ts.mu)
	e.PutFloat64s(ts.sd)
	e.PutFloat64s(ts.inv)
	e.PutUvarint(uint64(ts.since))
	e.PutFloat64s(ts.refMu)
	e.PutFloat64s(ts.refInv)
	for _, v := range []float64{ts.maxW, ts.maxWA2, ts.rmax, ts.mnorm, ts.atRefresh, ts.sinceMax, ts.boundAtResync} {
		e.PutFloat64(v)
	}
	e.PutUvarint(uint64(ts.dref))
	e.PutUvarint(uint64(ts.dunref))
	e.PutUvarint(uint64(ts.arrivals))
	e.PutUvarint(uint64(ts.resyncLen))
}

// decode reads what encode wrote into an empty trainset. The records go
// back into the ring slots they held (the physical layout decides how a
// resync groups the rows for its kernel calls), by advancing the empty
// ring's head to the saved slot first.
func (ts *trainset) decode(d *window.Decoder, table []float64, k int) {
	c := ts.ring.Cap()
	head := d.Count("ring head", maxStateCap)
	n := d.Count("window length", maxStateCap)
	if d.Err() == nil && (head >= c || n > c) {
		d.Failf("ring head %d, length %d, capacity %d", head, n, c)
	}
	// A record holds at least its label and weight (8 bytes each), its time
	// (a varint, 1 byte or more) and its features and gradients (8 bytes
	// each after a length of 1 byte or more).
	if !need(d, n, 8*(2+ts.d+k)+2+min(k, 1), "window records") {
		return
	}
	for range head {
		ts.ring.Push(meta{})
		ts.ring.PopOldest()
	}
	for range n {
		var r meta
		r.y, r.w, r.t = d.Float64(), d.Float64(), d.Varint()
		ts.ring.Push(r)
		s := ts.ring.Slot(ts.ring.Len() - 1)
		d.Float64sInto(ts.row(s))
		if k > 0 {
			d.Float64sInto(table[s*k : s*k+k])
		}
	}
	ts.sc.w, ts.sc.wy = d.Float64(), d.Float64()
	d.Float64sInto(ts.sc.mean)
	d.Float64sInto(ts.sc.m2)
	d.Float64sInto(ts.sc.sxy)
	d.Float64sInto(ts.mu)
	d.Float64sInto(ts.sd)
	d.Float64sInto(ts.inv)
	ts.since = d.Count("since", maxStateInt)
	d.Float64sInto(ts.refMu)
	d.Float64sInto(ts.refInv)
	for _, p := range []*float64{&ts.maxW, &ts.maxWA2, &ts.rmax, &ts.mnorm, &ts.atRefresh, &ts.sinceMax, &ts.boundAtResync} {
		*p = d.Float64()
	}
	ts.dref = d.Count("features with a reference scale", ts.d)
	ts.dunref = d.Count("features without a reference scale", ts.d-ts.dref)
	ts.arrivals = d.Count("arrivals", maxStateInt)
	ts.resyncLen = d.Count("length at resync", c)
}

// encode appends the gram learner's state: the train window (records
// without gradients, scaler and scales, as trainset.encode), the shift and
// the sums bit for bit, the rebuild and solve bookkeeping, then the
// members (λ, intercept, KKT at the last solve, coefficients, stale).
func (c *covLearner) encode(e *window.Encoder) {
	c.ts.encode(e, nil, 0)
	e.PutFloat64s(c.cx)
	e.PutFloat64(c.cy)
	e.PutFloat64(c.sw)
	e.PutFloat64(c.sy)
	e.PutFloat64s(c.sx)
	e.PutFloat64s(c.sxy)
	e.PutFloat64s(c.sxx)
	e.PutUvarint(uint64(c.built))
	e.PutUvarint(uint64(c.builtAt))
	e.PutBool(c.stale)
	e.PutBool(c.due)
	e.PutBool(c.solved)
	e.PutUvarint(uint64(c.sinceSolve))
	e.PutBool(c.lazy)
	e.PutUvarint(uint64(len(c.ms)))
	for _, m := range c.ms {
		e.PutFloat64(m.lambda)
		e.PutFloat64(m.b)
		e.PutFloat64(m.kkt)
		e.PutFloat64s(m.theta)
		e.PutBool(m.stale)
	}
}

// decode reads what encode wrote into a learner fresh from newCov; a
// state of version 4 has no stale flags (every member at its last solve)
// and no lazy flag (its due solve solves every member).
func (c *covLearner) decode(d *window.Decoder, version byte) {
	c.ts.decode(d, nil, 0)
	d.Float64sInto(c.cx)
	c.cy, c.sw, c.sy = d.Float64(), d.Float64(), d.Float64()
	d.Float64sInto(c.sx)
	d.Float64sInto(c.sxy)
	d.Float64sInto(c.sxx)
	c.built = d.Count("arrivals since rebuild", maxStateInt)
	c.builtAt = d.Count("length at rebuild", c.ts.ring.Cap())
	c.stale, c.due, c.solved = d.Bool(), d.Bool(), d.Bool()
	c.sinceSolve = d.Count("arrivals since solve", maxStateInt)
	if version >= 5 {
		c.lazy = d.Bool()
	}
	if n := d.Count("members", maxStateSize); d.Err() == nil && n != len(c.ms) {
		d.Failf("%d members, want %d", n, len(c.ms))
	}
	for _, m := range c.ms {
		m.lambda, m.b, m.kkt = d.Float64(), d.Float64(), d.Float64()
		d.Float64sInto(m.theta)
		if version >= 5 {
			m.stale = d.Bool()
		}
	}
}

// encode appends the decay learner's state: its clock and decayed counts,
// the per-feature scale and last-touch clocks, then every member's
// FTRL-Proximal state.
func (l *decayLearner) encode(e *window.Encoder) {
	e.PutVarint(l.clock)
	e.PutFloat64(l.count)
	e.PutFloat64(l.wsum)
	e.PutUvarint(uint64(l.since))
	for _, t := range l.last {
		e.PutVarint(t)
	}
	for _, v := range [][]float64{l.fw, l.mean, l.m2, l.ymean, l.cxy, l.sd, l.inv} {
		e.PutFloat64s(v)
	}
	e.PutUvarint(uint64(len(l.ms)))
	for _, m := range l.ms {
		e.PutFloat64(m.lambda)
		e.PutFloat64(m.b)
		e.PutFloat64(m.zb)
		e.PutFloat64(m.nb)
		e.PutFloat64s(m.theta)
		e.PutFloat64s(m.z)
		e.PutFloat64s(m.n)
		e.PutFloat64s(m.sqn)
	}
}

// decode reads what encode wrote into a learner fresh from newDecay.
func (l *decayLearner) decode(d *window.Decoder) {
	l.clock = d.Varint()
	l.count, l.wsum = d.Float64(), d.Float64()
	l.since = d.Count("since", maxStateInt)
	if !need(d, len(l.last), 1, "last touches") {
		return
	}
	for j := range l.last {
		l.last[j] = d.Varint()
	}
	for _, v := range [][]float64{l.fw, l.mean, l.m2, l.ymean, l.cxy, l.sd, l.inv} {
		d.Float64sInto(v)
	}
	if n := d.Count("members", maxStateSize); d.Err() == nil && n != len(l.ms) {
		d.Failf("%d members, want %d", n, len(l.ms))
	}
	for _, m := range l.ms {
		m.lambda, m.b, m.zb, m.nb = d.Float64(), d.Float64(), d.Float64(), d.Float64()
		d.Float64sInto(m.theta)
		d.Float64sInto(m.z)
		d.Float64sInto(m.n)
		d.Float64sInto(m.sqn)
	}
}
