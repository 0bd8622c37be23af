package pipeline

import (
	"math"
	"slices"

	"lariat/config"
	"lariat/window"
)

// lossDetector runs ADWIN or Page-Hinkley on the bounded test-then-train
// loss (values in [0, 1]).
type lossDetector struct {
	adwin *window.ADWIN
	ph    *window.PageHinkley
}

// lossChange describes a detected change of the mean bounded loss.
type lossChange struct {
	up            bool    // the mean went up (a drift, not a recovery)
	before, after float64 // mean before and after the change (ADWIN only)
	stat          float64 // ADWIN: after − before; Page-Hinkley: its statistic
	threshold     float64 // ADWIN: its confidence δ; Page-Hinkley: λ
	width         int     // detector window before the change
}

// newLossDetector returns the detector chosen by drift.performance, or nil
// for "off". ADWIN gets Range 1: the bounded loss lies in [0, 1], so its δ
// guarantee holds.
func newLossDetector(dc config.Drift) *lossDetector {
	switch dc.Performance {
	case config.DriftADWIN:
		return &lossDetector{adwin: window.NewADWINOptions(&window.ADWINOptions{Delta: dc.Delta, Range: 1})}
	case config.DriftPageHinkley:
		return &lossDetector{ph: window.NewPageHinkley(&window.PageHinkleyOptions{
			Delta: dc.Delta, Threshold: phThreshold,
		})}
	}
	return nil
}

// add feeds u and reports a detected change. It does not allocate.
func (d *lossDetector) add(u float64) (c lossChange, fired bool) {
	if d.ph != nil {
		return d.addPH(u)
	}
	a := d.adwin
	n0, m0 := a.Width(), a.Mean()
	if !a.Add(u) {
		return c, false
	}
	n1, m1 := a.Width(), a.Mean()
	dropped := n0 + 1 - n1
	if dropped <= 0 || n1 <= 0 {
		return c, false
	}
	before := (m0*float64(n0) + u - m1*float64(n1)) / float64(dropped)
	return lossChange{
		up:        m1 > before,
		before:    before,
		after:     m1,
		stat:      m1 - before,
		threshold: a.Delta(),
		width:     n0 + 1,
	}, true
}

// addPH feeds u to Page-Hinkley, which only detects increases.
func (d *lossDetector) addPH(u float64) (lossChange, bool) {
	p := d.ph
	if math.IsNaN(u) || math.IsInf(u, 0) {
		return lossChange{}, false
	}
	width := p.Count() + 1
	if !p.Add(u) {
		return lossChange{}, false
	}
	return lossChange{up: true, stat: p.Statistic(), threshold: p.Threshold(), width: width}, true
}

// reset restarts the detector.
func (d *lossDetector) reset() {
	if d.adwin != nil {
		d.adwin.Reset()
	}
	if d.ph != nil {
		d.ph.Reset()
	}
}

// width returns the detector's current window (ADWIN width, Page-Hinkley
// count).
func (d *lossDetector) width() int {
	if d.adwin != nil {
		return d.adwin.Width()
	}
	return d.ph.Count()
}

// robustScale returns 1.4826·MAD of ys, or their population standard
// deviation when the MAD is 0 (a target with many ties), or 1 when that is
// 0 too. It allocates (a sorted copy) and runs at warm-up and re-takes only.
func robustScale(ys []float64) float64 {
	v := make([]float64, 0, len(ys))
	for _, y := range ys {
		if !math.IsNaN(y) && !math.IsInf(y, 0) {
			v = append(v, y)
		}
	}
	if len(v) == 0 {
		return 1
	}
	slices.Sort(v)
	med := median(v)
	dev := make([]float64, len(v))
	var sum, sq float64
	for i, y := range v {
		dev[i] = math.Abs(y - med)
		sum += y
	}
	mean := sum / float64(len(v))
	for _, y := range v {
		sq += (y - mean) * (y - mean)
	}
	slices.Sort(dev)
	if s := madToSD * median(dev); s > 0 {
		return s
	}
	if s := math.Sqrt(sq / float64(len(v))); s > 0 {
		return s
	}
	return 1
}

// median of a sorted, non-empty slice.
func median(v []float64) float64 {
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}
