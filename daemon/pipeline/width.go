package pipeline

import (
	"slices"
	"unsafe"

	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// The width of a model follows the names its decoder has learned: the
// ladder, the held-out ring and the drift watch start as wide as the fixed
// feature list (at least one column) and grow when a record carries more
// names, up to Width. On an empty model they grow to exactly the names
// seen, so a stream whose channels all come with its first record trains
// exactly as a model with those channels listed; later they double (at most
// to Width), so that channels that trickle in cost a logarithmic number of
// re-layouts. A slot whose name changed since the last record (the decoder
// freed it after a whole window without the name, and perhaps gave it to a
// new name) has its column reset everywhere before the record is applied:
// its coefficients are 0 and its statistics start afresh.

// layoutDue reports whether rec needs a change of the model's columns
// before it is applied (a name or a column the model has not laid out, or
// a slot that changed hands), and checks such a record as the learner will
// (online.Ladder.Check): a change of layout is made only for a record that
// passes every check, so that a rejected record leaves the model as it
// was; the change then comes with the next record taken.
func (p *Pipeline) layoutDue(rec *record.Record, names []string) (bool, error) {
	old := p.at.names
	same := len(old) == len(names) && (len(old) == 0 || unsafe.SliceData(old) == unsafe.SliceData(names))
	if same && max(len(rec.X), len(names)) <= p.ladder.Features() {
		return false, nil
	}
	if err := p.ladder.Check(rec.Learn()); err != nil {
		return false, &record.Error{Reason: learnerReason(err), Detail: err.Error()}
	}
	return true, nil
}

// layout brings the model's columns up to date with the decoder's names
// for rec, once layoutDue said so and every check passed.
func (p *Pipeline) layout(rec *record.Record, names []string) {
	old := p.at.names
	p.at.names = names
	if need := max(len(rec.X), len(names)); need > p.ladder.Features() {
		p.grow(need)
	}
	if len(old) == 0 || len(names) == 0 || unsafe.SliceData(old) == unsafe.SliceData(names) {
		return // the same array: names were only appended
	}
	for j := range min(len(old), len(names)) {
		if old[j] != names[j] && old[j] != "" {
			p.resetColumn(j)
		}
	}
}

// grow widens the ladder, the held-out ring and the watch to hold need
// columns (see the file comment).
func (p *Pipeline) grow(need int) {
	d := p.ladder.Features()
	n := need
	if p.ladder.Len() > 0 || p.HeldOutLen() > 0 {
		n = min(p.dim, max(need, 2*d))
	}
	p.ladder.Grow(n)
	if p.hold != nil {
		p.hold.Grow(n)
	}
	p.watch.resize(n)
}

// resetColumn forgets column j, whose name left: the ladder and the
// held-out ring reset it, and the watch forgets its support and restarts
// its data sample.
func (p *Pipeline) resetColumn(j int) {
	p.ladder.ResetFeature(j)
	if p.hold != nil {
		p.hold.ResetFeature(j)
	}
	p.watch.support[j], p.watch.streak[j] = false, 0
	p.watch.resize(p.ladder.Features())
	p.freed++
}

// resize restarts the data sample at width n (its reference is re-taken
// from the new sample once it is full, see rereference) and widens the
// support bookkeeping.
func (wt *watch) resize(n int) {
	wt.sample = newFeatureSample(n, len(wt.sample.y))
	wt.ref, wt.shifts = nil, wt.shifts[:0]
	wt.sinceRef, wt.sinceData = 0, 0
	for len(wt.support) < n {
		wt.support = append(wt.support, false)
		wt.streak = append(wt.streak, 0)
	}
}

// rereference takes the data reference again once a warm watch whose
// sample was restarted (resize) has a full sample.
func (wt *watch) rereference() {
	if wt.warm && wt.ref == nil && wt.sample.full() {
		wt.ref = wt.sample.reference()
		wt.shifts = wt.shifts[:0]
		wt.sinceRef, wt.sinceData = 0, 0
	}
}

// compact drops from m the columns whose slot is free ("" in names) and
// returns the names of the columns kept; nothing is copied when no slot is
// free. m must be trimmed to len(names).
func compact(m *online.Model, names []string) []string {
	if !slices.Contains(names, "") {
		return names
	}
	kept := make([]string, 0, len(names))
	k := 0
	for j, name := range names {
		if name == "" {
			continue
		}
		kept = append(kept, name)
		m.Coef[k], m.Standardized[k], m.Mean[k], m.Std[k] = m.Coef[j], m.Standardized[j], m.Mean[j], m.Std[j]
		k++
	}
	trim(m, k)
	return kept
}

// renamed reports whether the feature list changed since the last
// published document (a slot freed or taken): a new version goes out, so
// that a freed name does not stay in the served document until the
// heartbeat.
func renamed(prev, next *sink.ModelDoc) bool {
	return prev != nil && !slices.Equal(prev.Features, next.Features)
}
