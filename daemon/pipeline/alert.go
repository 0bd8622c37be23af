package pipeline

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"lariat/sink"
	"lariat/window"
)

// alertKindIndex returns the position of k in the watch's per-kind arrays.
func alertKindIndex(k sink.AlertKind) int {
	switch k {
	case sink.KindPerformance:
		return 0
	case sink.KindData:
		return 1
	case sink.KindModel:
		return 2
	}
	return 3 // sink.KindPrediction
}

// alertGate applies drift.cooldown per (model, kind): an alert of a kind is
// held back while less than the cooldown has passed since the last one of
// that kind that went out. The clock is the triggering record's time when
// it carries one ("t"), so a replayed or back-filled stream is rate-limited
// in its own time, and the wall-clock time the caller passed in otherwise.
// A switch between the two clocks (a stream that starts or stops carrying
// "t") ends the cooldown, because the two times cannot be compared; so does
// a record time that goes backwards by more than the cooldown. A cooldown of
// 0 lets every alert out.
type alertGate struct {
	cooldown int64 // milliseconds
	last     [4]gateStamp
}

type gateStamp struct {
	at     int64 // Unix ms
	record bool  // at is a record time
	set    bool
}

// allow reports whether an alert of kind may go out at m, and if so starts
// its cooldown; it counts the detection in st either way.
func (g *alertGate) allow(kind sink.AlertKind, m *moment, st *watchStats) bool {
	i := alertKindIndex(kind)
	if st != nil {
		st.detected[i]++
	}
	at, rec := m.stamp()
	last := &g.last[i]
	if g.cooldown > 0 && last.set && last.record == rec {
		if el := at - last.at; el < g.cooldown && el > -g.cooldown {
			if st != nil {
				st.suppressed[i]++
			}
			return false
		}
	}
	*last = gateStamp{at: at, record: rec, set: true}
	return true
}

// featureName returns the name of column j, or "#j" when the model has not
// published that name yet.
func featureName(names []string, j int) string {
	if j < len(names) && names[j] != "" { // "": a free slot
		return names[j]
	}
	return fmt.Sprintf("#%d", j)
}

// perfMessage describes a performance drift; after is the number of
// records since the estimated change point (−1 without adaptation, 0 when
// no change point was found).
func perfMessage(d *lossDetector, c lossChange, after int) string {
	var msg string
	if d.adwin != nil {
		msg = fmt.Sprintf("ADWIN (δ %g): mean bounded loss rose from %.4f to %.4f (by %.4f)",
			c.threshold, c.before, c.after, c.stat)
	} else {
		msg = fmt.Sprintf("Page-Hinkley statistic %.3f > λ %.3f on the bounded loss", c.stat, c.threshold)
	}
	switch {
	case after > 0:
		msg += fmt.Sprintf("; change estimated %d records ago, the window keeps the records since", after)
	case after == 0:
		msg += "; no change point found in the loss trail, the window is kept"
	}
	return msg
}

// dataMessage names the shifted features (worst PSI first) and describes
// each.
func dataMessage(shifts []window.FeatureShift, shifted func(window.FeatureShift) bool, names []string) ([]string, string) {
	var hit []window.FeatureShift
	for _, s := range shifts {
		if shifted(s) {
			hit = append(hit, s)
		}
	}
	slices.SortStableFunc(hit, func(a, b window.FeatureShift) int {
		ka, kb := max(a.PSI, math.Abs(a.MeanShift)/10), max(b.PSI, math.Abs(b.MeanShift)/10)
		switch {
		case ka > kb:
			return -1
		case ka < kb:
			return 1
		}
		return 0
	})
	out := make([]string, len(hit))
	var b strings.Builder
	b.WriteString("data shift against the reference:")
	for i, s := range hit {
		out[i] = featureName(names, s.Feature)
		if i < 10 {
			fmt.Fprintf(&b, " %s (PSI %.3f, mean shift %+.2f sd)", out[i], s.PSI, s.MeanShift)
		}
	}
	if len(hit) > 10 {
		fmt.Fprintf(&b, " and %d more", len(hit)-10)
	}
	return out, b.String()
}

// modelMessage names the features that entered (+) or left (−) the support
// and the move of λ*.
func modelMessage(names []string, entered, left []int, moved bool, from, to, steps float64) ([]string, string) {
	var out []string
	var b strings.Builder
	b.WriteString("model change:")
	for _, j := range entered {
		n := featureName(names, j)
		out = append(out, n)
		fmt.Fprintf(&b, " +%s", n)
	}
	for _, j := range left {
		n := featureName(names, j)
		out = append(out, n)
		fmt.Fprintf(&b, " −%s", n)
	}
	if len(entered)+len(left) > 0 {
		b.WriteString(" (support)")
	}
	if moved {
		fmt.Fprintf(&b, " λ* %.4g → %.4g (%.1f ladder steps)", from, to, steps)
	}
	return out, b.String()
}
