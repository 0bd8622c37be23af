package daemon

import (
	"lariat/config"
)

// slotWatch follows the intake decoder's counts of names dropped past the
// feature cap and of slots freed (intake goroutine only).
type slotWatch struct {
	dropped, freed uint64 // the decoder's counts already reported
	decoded        uint64 // records decoded
	lastDrop       uint64 // decoded at the last drop
	flooding       bool   // a flood was logged and has not ended
}

// freeAfter returns the number of decoded records after which a learned
// name no record carried gives its slot back: one whole train window of
// m's records, counted with the records held out beside it (every k-th).
// By then no record in the train window has a value for the name.
func freeAfter(m *config.Model) int {
	n := m.Window.Records
	if k := m.Holdout.Every; !m.HoldoutOff() && k >= 2 {
		n += (n + k - 2) / (k - 1)
	}
	return n
}

// watchSlots counts what the decoder dropped and freed since the last
// record (lariat_features_dropped_total, lariat_feature_slots_freed_total)
// and logs a flood of new names once: when names are first dropped, and
// again only after a whole window of records without a drop.
func (w *worker) watchSlots() {
	s := &w.slots
	s.decoded++
	if f := w.dec.Freed(); f != s.freed {
		w.mm.SlotsFreed.Add(float64(f - s.freed))
		s.freed = f
	}
	d := w.dec.Dropped()
	if d == s.dropped {
		if s.flooding && s.decoded-s.lastDrop > uint64(freeAfter(w.cfg)) {
			s.flooding = false
			w.log.Info("no channel name dropped for a whole window: the flood of new names is over")
		}
		return
	}
	w.mm.FeaturesDropped.Add(float64(d - s.dropped))
	s.dropped, s.lastDrop = d, s.decoded
	if !s.flooding {
		s.flooding = true
		w.log.Warn("feature cap reached: values of new channel names are dropped (the records train on their known channels) until names unseen for a whole window give their slots back",
			"max_features", w.dim, "window_records", freeAfter(w.cfg))
	}
}
