package online

import (
	"fmt"
	"time"
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
// exponentially weighted scale. Scratch buffers are not saved.
//
// A ladder with a Loss other than Squared or Logistic cannot be saved:
// MarshalBinary returns an error wrapping ErrState. The format is
// described in UnmarshalLadder.
func (l *Ladder) MarshalBinary() ([]byte, error) {
	name, err := lossName(l.opt.Loss)
	if err != nil {
		return nil, err
	}
	e := encoder{}
	if s, ok := l.lrn.(*sagaLearner); ok {
		e.b = make([]byte, 0, 256+8*16*l.d+len(l.lambdas)*8*(2*l.d+16)+s.ts.ring.Len()*8*(l.d+3+s.k))
	}
	e.header(stateLadder)
	o := &l.opt
	e.str(name)
	e.f(o.Penalty.Mix)
	e.int(o.Features)
	e.int(o.Window)
	e.int64(int64(o.Span))
	e.int(o.Size)
	e.f(o.Floor)
	e.f(o.Lambda)
	e.int(o.Steps)
	e.u64(o.Seed)
	e.str(o.Learner)
	e.f(o.HalfLife)
	e.uint(l.seen)
	e.f(l.lmax)
	e.f(l.anchor)
	e.flen(l.lambdas)
	switch lrn := l.lrn.(type) {
	case *sagaLearner:
		if err := lrn.encode(&e); err != nil {
			return nil, err
		}
	case *decayLearner:
		lrn.encode(&e)
	}
	return e.b, nil
}

// UnmarshalLadder returns the ladder whose state MarshalBinary saved in b.
// Any defect (truncation, trailing bytes, an unknown version, sizes that
// do not fit together or exceed the bounds of a restore) returns an error
// wrapping ErrState; no input makes it panic, and it allocates only the
// buffers of the ladder that b describes.
//
// The format, version 1: the version byte 1 and the type byte 'L'; the
// options (loss name, penalty mix, features, window, span in
// nanoseconds, size, floor, fixed λ, steps, seed as 8 bytes, learner name,
// half-life); the records seen, λ_max, the anchor of the grid and the
// grid; then the learner's state (sagaLearner.encode, decayLearner.encode).
// Integers are varints, float64 their little-endian IEEE 754 bits,
// strings and slices carry a varint length.
func UnmarshalLadder(b []byte) (*Ladder, error) {
	d := decoder{b: b}
	d.header(stateLadder)
	opt := decodeOptions(&d)
	if d.err != nil {
		return nil, d.err
	}
	l, err := NewLadder(&opt)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrState, err)
	}
	if l.opt.Window != opt.Window || l.opt.Size != opt.Size || l.opt.Steps != opt.Steps ||
		l.opt.Floor != opt.Floor || l.opt.HalfLife != opt.HalfLife {
		return nil, fmt.Errorf("%w: options not in resolved form", ErrState)
	}
	l.seen = d.uint()
	l.lmax, l.anchor = d.f(), d.f()
	d.flen(l.lambdas, "lambda grid")
	switch lrn := l.lrn.(type) {
	case *sagaLearner:
		lrn.decode(&d, l.xbuf)
	case *decayLearner:
		lrn.decode(&d)
	}
	if err := d.end(); err != nil {
		return nil, err
	}
	return l, nil
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
func decodeOptions(d *decoder) Options {
	name := d.str(64, "loss")
	mix := d.f()
	var o Options
	o.Features = d.int(maxStateFeatures, "features")
	o.Window = d.int(maxStateCap, "window")
	o.Span = time.Duration(d.int64())
	o.Size = d.int(maxStateSize, "size")
	o.Floor, o.Lambda = d.f(), d.f()
	o.Steps = d.int(maxStateSteps, "steps")
	o.Seed = d.u64()
	o.Learner = d.str(16, "learner")
	o.HalfLife = d.f()
	if d.err != nil {
		return o
	}
	loss, ok := LossByName(name)
	if !ok {
		d.fail("unknown loss %q", name)
		return o
	}
	o.Loss, o.Penalty = loss, &Penalty{Mix: mix}
	if o.Features < 1 || o.Window < 1 || o.Size < 1 || o.Steps < 1 || o.Learner == "" {
		d.fail("features %d, window %d, size %d, steps %d, learner %q", o.Features, o.Window, o.Size, o.Steps, o.Learner)
		return o
	}
	// In int64: the product can exceed a 32-bit int.
	d64, k64 := int64(o.Features), int64(o.Size)
	words, perMember := k64*(2*d64+16), 2*o.Features
	if o.Learner == "decay" {
		words, perMember = k64*(4*d64+8)+12*d64, 4*o.Features
	} else {
		words += int64(o.Window)*(d64+k64+sagaSlotWords) + 12*d64
	}
	if words > int64(stateWordLimit) {
		d.fail("buffers of %d words above %d", words, stateWordLimit)
		return o
	}
	// Each member saves at least perMember float64 (its vectors).
	d.need(o.Size, 8*perMember, "members")
	return o
}

// encode appends the SAGA learner's state: the train window, then the
// learner's scalars and generator, then the members.
func (s *sagaLearner) encode(e *encoder) error {
	s.ts.encode(e, s.ms)
	e.f(s.gamma)
	e.f(s.gkey.maxW)
	e.f(s.gkey.bound)
	e.f(s.gkey.w)
	e.int(s.gkey.n)
	e.f(s.c)
	e.f(s.cGamma)
	e.f(s.cW)
	e.bool(s.pending)
	e.bool(s.pfull)
	e.int(s.pslot)
	e.int64(int64(s.first))
	e.bool(s.primed)
	if s.pending {
		e.fs(s.pend)
	}
	rng, err := s.src.MarshalBinary()
	if err != nil {
		return fmt.Errorf("%w: %w", ErrState, err)
	}
	e.bytes(rng)
	e.int(len(s.ms))
	for _, m := range s.ms {
		e.f(m.lambda)
		e.f(m.b)
		e.f(m.gsum)
		e.f(m.thr)
		e.f(m.shrink)
		e.f(m.eta)
		e.f(m.gnew)
		e.f(m.gold)
		e.fs(m.theta)
		e.fs(m.s)
	}
	return nil
}

// decode reads what encode wrote into a learner fresh from newSAGA; xbuf
// is the ladder's record buffer, which a pending admission refers to.
func (s *sagaLearner) decode(d *decoder, xbuf []float64) {
	s.ts.decode(d, s.ms, s.k)
	s.gamma = d.f()
	s.gkey.maxW, s.gkey.bound, s.gkey.w = d.f(), d.f(), d.f()
	s.gkey.n = d.int(maxStateCap, "step key length")
	s.c, s.cGamma, s.cW = d.f(), d.f(), d.f()
	s.pending, s.pfull = d.bool("pending"), d.bool("pending full")
	s.pslot = d.int(maxStateCap, "pending slot")
	s.first = int(d.int64())
	s.primed = d.bool("primed")
	if s.pending {
		s.pend = xbuf
		d.fs(s.pend, "pending record")
	}
	rng := d.bytes(64, "generator")
	if d.err == nil {
		if err := s.src.UnmarshalBinary(rng); err != nil {
			d.fail("generator: %v", err)
		}
	}
	if n := d.int(maxStateSize, "members"); d.err == nil && n != len(s.ms) {
		d.fail("%d members, want %d", n, len(s.ms))
	}
	for _, m := range s.ms {
		m.lambda, m.b, m.gsum = d.f(), d.f(), d.f()
		m.thr, m.shrink = d.f(), d.f()
		m.eta, m.gnew, m.gold = d.f(), d.f(), d.f()
		d.fs(m.theta, "coefficients")
		d.fs(m.s, "gradient sums")
	}
	s.check(d)
}

// check refuses step bookkeeping that would send the next step outside
// the window: a first step is drawn (first ≥ 0) exactly when the members'
// predictors are primed, and a pending admission is the newest record.
func (s *sagaLearner) check(d *decoder) {
	if d.err != nil {
		return
	}
	n := s.ts.ring.Len()
	switch {
	case s.primed != (s.first >= 0) || s.first < -1 || s.first >= n:
		d.fail("first step %d (primed %v) in a window of %d", s.first, s.primed, n)
	case s.pending && (!s.primed || s.pslot != s.ts.ring.Slot(n-1)):
		d.fail("pending admission in slot %d", s.pslot)
	}
}

// encode appends the window: the ring's head slot and length, each record
// oldest first (label, weight, time, features and the members' gradients),
// the exact scaler, the working scale and the pieces of the step bound.
func (ts *trainset) encode(e *encoder, ms []*sagaMember) {
	n := ts.ring.Len()
	head := 0
	if n > 0 {
		head = ts.ring.Slot(0)
	}
	e.int(head)
	e.int(n)
	k := len(ms)
	for i := range n {
		r, s := ts.ring.At(i), ts.ring.Slot(i)
		e.f(r.y)
		e.f(r.w)
		e.u64(uint64(r.t))
		e.fs(ts.row(s))
		e.fs(ms[0].g[s*k : s*k+k])
	}
	e.f(ts.sc.w)
	e.f(ts.sc.wy)
	e.fs(ts.sc.mean)
	e.fs(ts.sc.m2)
	e.fs(ts.sc.sxy)
	e.fs(ts.mu)
	e.fs(ts.sd)
	e.fs(ts.inv)
	e.int(ts.since)
	e.fs(ts.refMu)
	e.fs(ts.refInv)
	for _, v := range []float64{ts.maxW, ts.maxWA2, ts.rmax, ts.mnorm, ts.atRefresh, ts.sinceMax, ts.boundAtResync} {
		e.f(v)
	}
	e.int(ts.dref)
	e.int(ts.dunref)
	e.int(ts.arrivals)
	e.int(ts.resyncLen)
}

// decode reads what encode wrote into an empty trainset. The records go
// back into the ring slots they held (the physical layout decides how a
// resync groups the rows for its kernel calls), by advancing the empty
// ring's head to the saved slot first.
func (ts *trainset) decode(d *decoder, ms []*sagaMember, k int) {
	c := ts.ring.Cap()
	head := d.int(maxStateCap, "ring head")
	n := d.int(maxStateCap, "window length")
	if d.err == nil && (head >= c || n > c) {
		d.fail("ring head %d, length %d, capacity %d", head, n, c)
	}
	if !d.need(n, 8*(3+ts.d+k), "window records") {
		return
	}
	for range head {
		ts.ring.Push(meta{})
		ts.ring.PopOldest()
	}
	table := ms[0].g
	for range n {
		var r meta
		r.y, r.w, r.t = d.f(), d.f(), int64(d.u64())
		ts.ring.Push(r)
		s := ts.ring.Slot(ts.ring.Len() - 1)
		d.fs(ts.row(s), "record")
		d.fs(table[s*k:s*k+k], "gradients")
	}
	ts.sc.w, ts.sc.wy = d.f(), d.f()
	d.fs(ts.sc.mean, "scaler")
	d.fs(ts.sc.m2, "scaler")
	d.fs(ts.sc.sxy, "scaler")
	d.fs(ts.mu, "scale")
	d.fs(ts.sd, "scale")
	d.fs(ts.inv, "scale")
	ts.since = d.int(maxStateInt, "since")
	d.fs(ts.refMu, "reference scale")
	d.fs(ts.refInv, "reference scale")
	for _, p := range []*float64{&ts.maxW, &ts.maxWA2, &ts.rmax, &ts.mnorm, &ts.atRefresh, &ts.sinceMax, &ts.boundAtResync} {
		*p = d.f()
	}
	ts.dref = d.int(ts.d, "features with a reference scale")
	ts.dunref = d.int(ts.d-ts.dref, "features without a reference scale")
	ts.arrivals = d.int(maxStateInt, "arrivals")
	ts.resyncLen = d.int(c, "length at resync")
}

// encode appends the decay learner's state: its clock and decayed counts,
// the per-feature scale and last-touch clocks, then every member's
// FTRL-Proximal state.
func (l *decayLearner) encode(e *encoder) {
	e.int64(l.clock)
	e.f(l.count)
	e.f(l.wsum)
	e.int(l.since)
	for _, t := range l.last {
		e.int64(t)
	}
	for _, v := range [][]float64{l.fw, l.mean, l.m2, l.ymean, l.cxy, l.sd, l.inv} {
		e.fs(v)
	}
	e.int(len(l.ms))
	for _, m := range l.ms {
		e.f(m.lambda)
		e.f(m.b)
		e.f(m.zb)
		e.f(m.nb)
		e.fs(m.theta)
		e.fs(m.z)
		e.fs(m.n)
		e.fs(m.sqn)
	}
}

// decode reads what encode wrote into a learner fresh from newDecay.
func (l *decayLearner) decode(d *decoder) {
	l.clock = d.int64()
	l.count, l.wsum = d.f(), d.f()
	l.since = d.int(maxStateInt, "since")
	if !d.need(len(l.last), 1, "last touches") {
		return
	}
	for j := range l.last {
		l.last[j] = d.int64()
	}
	for _, v := range [][]float64{l.fw, l.mean, l.m2, l.ymean, l.cxy, l.sd, l.inv} {
		d.fs(v, "scale")
	}
	if n := d.int(maxStateSize, "members"); d.err == nil && n != len(l.ms) {
		d.fail("%d members, want %d", n, len(l.ms))
	}
	for _, m := range l.ms {
		m.lambda, m.b, m.zb, m.nb = d.f(), d.f(), d.f(), d.f()
		d.fs(m.theta, "coefficients")
		d.fs(m.z, "accumulators")
		d.fs(m.n, "accumulators")
		d.fs(m.sqn, "accumulators")
	}
}
