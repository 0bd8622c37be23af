package pipeline

import (
	"encoding/json"
	"fmt"
	"hash/fnv"
	"time"

	"lariat/config"
	"lariat/online"
	"lariat/sink"
	"lariat/window"
)

// stateFormat is the version of the layout MarshalBinary writes. Format 4
// holds the current width (a model grows with the names it learns), the
// count of reset columns and, at the end, the plausibility guard's
// statistics and the newest record time. Older formats are refused (their
// ladder state, online format 3 or older, is no longer read either).
const stateFormat = 4

// fingerprint hashes the configuration a pipeline's state depends on: a
// checkpoint made under another learning configuration is refused on
// restore (the model starts fresh), while the settings that only shape
// what is published (threshold, publish, queue, score subject) may change
// freely.
func fingerprint(m *config.Model) uint64 {
	h := fnv.New64a()
	fmt.Fprintf(h, "%q %q %q %v %v %+v %+v %+v %+v %+v %q %d %q %+v",
		m.Name, m.Loss, m.Penalty, m.Mix, m.Lambda, m.Ladder, m.Window, m.Holdout, m.Retune.Rule,
		m.Learner, m.Features, m.MaxFeatures, m.Missing, m.Drift)
	return h.Sum64()
}

// MarshalBinary returns the pipeline's whole state: the ladder (learner
// state, window, scaler, random generator), the held-out ring, the chooser
// with its hysteresis, the counters, the feature names, the drift watch
// (detector, loss trail and waiting cut, data reference and sample,
// support streaks, cooldowns), the threshold tuner, the version, the last
// published document, the stream position, the plausibility guard's
// statistics and run lengths, and the newest record time. Restore brings
// it back bit for bit.
func (p *Pipeline) MarshalBinary() ([]byte, error) {
	e := newEnc()
	e.uvarint(stateFormat)
	e.str(p.name)
	e.uvarint(fingerprint(p.cfg))
	e.int(p.dim)
	e.int(p.ladder.Features())
	e.uvarint(p.freed)
	if err := p.marshalModel(e); err != nil {
		return nil, err
	}
	p.marshalCounters(e)
	if err := p.watch.marshal(e); err != nil {
		return nil, err
	}
	p.marshalTuner(e)
	p.marshalTail(e)
	return e.Bytes(), e.Err()
}

// marshalTail writes the end of format 4: the guard and the
// newest record time.
func (p *Pipeline) marshalTail(e enc) {
	p.guard.marshal(e)
	e.int64(p.newestT)
}

func (p *Pipeline) marshalModel(e enc) error {
	lb, err := p.ladder.MarshalBinary()
	if err != nil {
		return err
	}
	e.bytes(lb)
	e.bool(p.hold != nil)
	if p.hold != nil {
		hb, err := p.hold.MarshalBinary()
		if err != nil {
			return err
		}
		e.bytes(hb)
	}
	cb, err := p.chooser.MarshalBinary()
	if err != nil {
		return err
	}
	e.bytes(cb)
	return nil
}

func (p *Pipeline) marshalCounters(e enc) {
	e.uvarint(p.seq)
	e.uvarint(p.held)
	e.int(p.sinceRetune)
	e.bool(p.adopt)
	e.uvarint(uint64(len(p.scores)))
	for _, s := range p.scores {
		e.int(s.Index)
		e.int(s.Nonzero)
		for _, v := range [...]float64{s.Lambda, s.Loss, s.SE, s.AUC, s.Brier, s.LogLoss, s.RMSE, s.MAE, s.R2} {
			e.f64(v)
		}
	}
	e.strs(p.at.names)
	e.uvarint(p.version)
	e.int64(p.lastPub.UnixNano())
	e.uvarint(p.position)
	var doc []byte
	if p.last != nil {
		doc, _ = json.Marshal(p.last) // a published document always encodes
	}
	e.bytes(doc)
}

func (p *Pipeline) marshalTuner(e enc) {
	e.bool(p.tuner != nil)
	if t := p.tuner; t != nil {
		e.str(t.mode)
		e.f64(t.target)
		e.f64(t.value)
		e.bool(t.roc != nil)
		e.uvarint(uint64(len(t.roc)))
		for _, r := range t.roc {
			e.f64(r.Threshold)
			e.f64(r.TPR)
			e.f64(r.FPR)
			e.f64(r.Precision)
		}
	}
}

// Restore returns the pipeline of o.Model with the state b that
// MarshalBinary wrote. It refuses (with an error wrapping ErrState) bytes
// that are damaged or inconsistent, and a state made for another model or
// under another learning configuration (loss, penalty, ladder, window,
// holdout, learner, features, drift settings): the caller then starts the
// model fresh. One change of learner is taken over rather than refused: a
// state of the squared loss saved with learner saga (explicit, or unset
// in a version whose default was saga) restored with learner.kind unset
// gets a gram ladder built from the SAGA ladder's window (online.GramFrom;
// Upgraded reports it), with the rest of the state (held-out ring,
// chooser, drift watch, threshold, version, stream position) as saved;
// and a state saved with learner.kind unset by such a version is restored
// under an explicit saga as it was; an unset learner.kind and an
// explicit gram restore each other's states (the same learner). The threshold's mode and target are the configuration's, or
// the saved override's (o.Threshold), as at a fresh start; the tuned
// threshold itself is restored when they have not changed.
func Restore(o Options, b []byte) (*Pipeline, error) {
	p, err := New(o)
	if err != nil {
		return nil, err
	}
	d := newDec(b)
	format := d.uvarint()
	if !d.failed() && format != stateFormat {
		return nil, fmt.Errorf("%w: format %d (this build reads %d)", ErrState, format, stateFormat)
	}
	if name := d.str(); !d.failed() && name != p.name {
		return nil, fmt.Errorf("%w: the state is of model %q, not %q", ErrState, name, p.name)
	}
	if fp := d.uvarint(); !d.failed() && !fingerprintOK(fp, p.cfg) {
		return nil, fmt.Errorf("%w: the model's learning configuration changed since the state was saved", ErrState)
	}
	if dim := d.int(); !d.failed() && dim != p.dim {
		return nil, fmt.Errorf("%w: %d columns, the model has %d", ErrState, dim, p.dim)
	}
	width := d.int()
	p.freed = d.uvarint()
	if !d.failed() && (width < 1 || width > p.dim) {
		return nil, fmt.Errorf("%w: width %d, the model has at most %d columns", ErrState, width, p.dim)
	}
	if d.failed() {
		return nil, d.err()
	}
	p.watch.resize(width)
	if err := p.restoreModel(d, width); err != nil {
		return nil, err
	}
	p.restoreCounters(d)
	if err := p.watch.restore(d); err != nil {
		return nil, err
	}
	p.restoreTuner(d)
	p.guard.restore(d, p.dim, p.at.names)
	p.newestT = d.int64()
	if err := d.done(); err != nil {
		return nil, err
	}
	if p.tuner != nil {
		// The threshold's mode and target come from the configuration and
		// the saved override, as at a fresh start (removing the override
		// goes back to the configuration); the tuned value is kept when
		// they are what the state was saved with.
		want := newTuner(p.cfg, o.Threshold)
		if want.mode != p.tuner.mode || want.target != p.tuner.target {
			p.tuner.set(want.mode, want.target, p, p.current())
		}
	}
	return p, nil
}

func (p *Pipeline) restoreModel(d dec, width int) error {
	lb := d.bytes()
	if d.failed() {
		return d.err()
	}
	lad, err := online.UnmarshalLadder(lb)
	if err != nil {
		return fmt.Errorf("%w: ladder: %v", ErrState, err)
	}
	if lad, err = p.upgrade(lad); err != nil {
		return err
	}
	if lad.Features() != width || lad.MaxFeatures() != p.dim || lad.Size() != p.ladder.Size() {
		return fmt.Errorf("%w: ladder of %d×%d (at most %d wide), the model needs %d×%d (at most %d)", ErrState,
			lad.Size(), lad.Features(), lad.MaxFeatures(), p.ladder.Size(), width, p.dim)
	}
	p.ladder = lad
	if has := d.bool(); has != (p.hold != nil) {
		d.fail("held-out ring present %v, the model's %v", has, p.hold != nil)
	}
	if p.hold != nil {
		hb := d.bytes()
		if d.failed() {
			return d.err()
		}
		h := new(online.Holdout)
		if err := h.UnmarshalBinary(hb); err != nil {
			return fmt.Errorf("%w: held-out ring: %v", ErrState, err)
		}
		if h.Features() != width {
			return fmt.Errorf("%w: held-out ring of %d columns, the model has %d", ErrState, h.Features(), width)
		}
		p.hold = h
	}
	cb := d.bytes()
	if d.failed() {
		return d.err()
	}
	if err := p.chooser.UnmarshalBinary(cb); err != nil {
		return fmt.Errorf("%w: chooser: %v", ErrState, err)
	}
	return d.err()
}

func (p *Pipeline) restoreCounters(d dec) {
	p.seq, p.held = d.uvarint(), d.uvarint()
	p.sinceRetune = d.int()
	p.adopt = d.bool()
	n := d.count(11)
	p.scores = make([]online.Score, n)
	for i := range p.scores {
		s := &p.scores[i]
		s.Index, s.Nonzero = d.int(), d.int()
		for _, v := range [...]*float64{&s.Lambda, &s.Loss, &s.SE, &s.AUC, &s.Brier, &s.LogLoss, &s.RMSE, &s.MAE, &s.R2} {
			*v = d.f64()
		}
	}
	if names := d.strs(); len(names) > 0 {
		p.at.names = names
	}
	if len(p.at.names) > p.dim {
		d.fail("%d feature names for %d columns", len(p.at.names), p.dim)
	}
	p.version = d.uvarint()
	p.lastPub = time.Unix(0, d.int64())
	p.position = d.uvarint()
	if doc := d.bytes(); len(doc) > 0 && !d.failed() {
		var last sink.ModelDoc
		if err := json.Unmarshal(doc, &last); err != nil {
			d.fail("last document: %v", err)
			return
		}
		p.last = &last
	}
}

func (p *Pipeline) restoreTuner(d dec) {
	if has := d.bool(); has != (p.tuner != nil) {
		d.fail("threshold tuner present %v, the model's %v", has, p.tuner != nil)
		return
	}
	t := p.tuner
	if t == nil {
		return
	}
	t.mode, t.target, t.value = d.str(), d.f64(), d.f64()
	hasROC := d.bool()
	n := d.count(32)
	t.roc = nil
	if hasROC {
		t.roc = make([]online.ROCPoint, n)
	}
	for i := range n {
		r := online.ROCPoint{Threshold: d.f64(), TPR: d.f64(), FPR: d.f64(), Precision: d.f64()}
		if hasROC {
			t.roc[i] = r
		}
	}
	if !d.failed() && CheckThreshold(t.mode, min(max(t.target, 1e-300), 1-1e-16)) != nil {
		d.fail("threshold mode %q", t.mode)
	}
}

// marshal writes the drift watch's state.
func (wt *watch) marshal(e enc) error {
	e.bool(wt.warm)
	e.f64(wt.yScale)
	s := wt.sample
	e.f64s(s.rows)
	e.f64s(s.y)
	e.int(s.pos)
	e.int(s.n)
	e.bool(wt.ref != nil)
	if wt.ref != nil {
		rb, err := wt.ref.MarshalBinary()
		if err != nil {
			return err
		}
		e.bytes(rb)
	}
	e.int(wt.sinceRef)
	e.int(wt.sinceData)
	e.bool(wt.retake)
	e.bools(wt.support)
	e.ints(wt.streak)
	e.bool(wt.seenRaw)
	e.f64(wt.baseLambda)
	for _, g := range wt.gate.last {
		e.int64(g.at)
		e.bool(g.record)
		e.bool(g.set)
	}
	st := &wt.stats
	for i := range st.detected {
		e.int(st.detected[i])
		e.int(st.suppressed[i])
	}
	e.int(st.adaptations)
	e.int(st.recoveries)
	e.int(st.minor)
	return wt.marshalDetector(e)
}

func (wt *watch) marshalDetector(e enc) error {
	e.bool(wt.det != nil)
	if wt.det == nil {
		return nil
	}
	var b []byte
	var err error
	if wt.det.adwin != nil {
		b, err = wt.det.adwin.MarshalBinary()
	} else {
		b, err = wt.det.ph.MarshalBinary()
	}
	if err != nil {
		return err
	}
	e.bytes(b)
	e.bool(wt.trail != nil)
	if wt.trail != nil {
		wt.trail.encode(e)
		c := wt.cut
		e.bool(c.on)
		e.int(c.post)
		e.int(c.train)
		e.int(c.held)
	}
	return e.Err()
}

// restore reads what marshal wrote into a watch built for the same model.
func (wt *watch) restore(d dec) error {
	wt.warm = d.bool()
	wt.yScale = d.f64()
	s := wt.sample
	rows, ys := d.f64s(), d.f64s()
	pos, n := d.int(), d.int()
	if !d.failed() && (len(rows) != len(s.rows) || len(ys) != len(s.y) || pos < 0 || pos >= max(len(s.y), 1) || n < 0 || n > len(s.y)) {
		d.fail("data sample of %d×%d (at %d, %d filled), the model's is %d×%d", len(ys), len(rows)/max(len(ys), 1), pos, n, len(s.y), s.d)
	}
	if d.failed() {
		return d.err()
	}
	copy(s.rows, rows)
	copy(s.y, ys)
	s.pos, s.n = pos, n
	wt.ref = nil
	if d.bool() {
		rb := d.bytes()
		if d.failed() {
			return d.err()
		}
		ref := new(window.ShiftReference)
		if err := ref.UnmarshalBinary(rb); err != nil {
			return fmt.Errorf("%w: data reference: %v", ErrState, err)
		}
		if ref.Features() != s.d {
			return fmt.Errorf("%w: data reference of %d features, the model has %d", ErrState, ref.Features(), s.d)
		}
		wt.ref = ref
		s.setReference(ref) // re-bins the restored sample: the counts are those kept incrementally
	}
	wt.sinceRef, wt.sinceData = d.int(), d.int()
	wt.retake = d.bool()
	support, streak := d.bools(), d.ints()
	if !d.failed() && (len(support) != len(wt.support) || len(streak) != len(wt.streak)) {
		d.fail("support of %d features, the model has %d", len(support), len(wt.support))
	}
	copy(wt.support, support)
	copy(wt.streak, streak)
	wt.seenRaw = d.bool()
	wt.baseLambda = d.f64()
	for i := range wt.gate.last {
		wt.gate.last[i] = gateStamp{at: d.int64(), record: d.bool(), set: d.bool()}
	}
	st := &wt.stats
	for i := range st.detected {
		st.detected[i], st.suppressed[i] = d.int(), d.int()
	}
	st.adaptations, st.recoveries, st.minor = d.int(), d.int(), d.int()
	return wt.restoreDetector(d)
}

func (wt *watch) restoreDetector(d dec) error {
	if has := d.bool(); has != (wt.det != nil) {
		d.fail("performance detector present %v, the model's %v", has, wt.det != nil)
	}
	if d.failed() || wt.det == nil {
		return d.err()
	}
	b := d.bytes()
	if d.failed() {
		return d.err()
	}
	var err error
	if wt.det.adwin != nil {
		err = wt.det.adwin.UnmarshalBinary(b)
	} else {
		err = wt.det.ph.UnmarshalBinary(b)
	}
	if err != nil {
		return fmt.Errorf("%w: performance detector: %v", ErrState, err)
	}
	if has := d.bool(); has != (wt.trail != nil) {
		d.fail("loss trail present %v, the model's %v", has, wt.trail != nil)
	}
	if d.failed() || wt.trail == nil {
		return d.err()
	}
	if err := wt.trail.decode(d); err != nil {
		return err
	}
	c := pendingCut{on: d.bool(), post: d.int(), train: d.int(), held: d.int()}
	if !d.failed() && (c.post < 0 || c.train < 0 || c.held < 0 || c.train+c.held != c.post || (!c.on && c.post != 0)) {
		d.fail("waiting cut of %d records (%d train, %d held out)", c.post, c.train, c.held)
	}
	wt.cut = c
	return d.err()
}
