package pipeline

import (
	"math"

	"lariat/config"
	"lariat/sink"
	"lariat/window"
)

// The drift watch's fixed rules (see watch for the whole of them).
const (
	// adaptFloor is the fewest train records a drift adaptation keeps, so
	// the window never shrinks to a handful of records: a cut whose
	// estimated change is more recent waits for that many (see watch).
	adaptFloor = 50
	// shiftSampleMax and shiftSampleMin bound n_s, the size of the
	// data-drift reference and comparison samples: window.records/4 within
	// these. Two samples of n from one distribution have a PSI of about
	// (B−1)·2/n over B bins (its chi-square approximation; value from
	// memory), 0.036 for n = 500 and B = 10, far below the 0.25 rule of
	// thumb; with n = 100 it is 0.18 and stationary streams raised alerts.
	shiftSampleMax = 1000
	shiftSampleMin = 500
	// residualSaturation is c in the squared-loss detector input
	// min(1, (r/(c·s_y))²): a residual of c robust target standard
	// deviations or more counts as a total miss.
	residualSaturation = 3
	// madToSD turns a median absolute deviation into a standard deviation
	// for normal data: 1/Φ⁻¹(3/4) ≈ 1.4826 (Hampel 1974; value from memory).
	madToSD = 1.4826
	// minRise and minRiseRel are the smallest increase of the mean bounded
	// loss that counts as a performance drift when ADWIN cuts: at least
	// 0.005 and at least 10% of the level before. On long stationary
	// streams ADWIN's window grows to 10^5 values and more, and it then
	// finds real but immaterial moves of 0.001 to 0.008 (the model's own
	// fluctuation as λ* and the window move): measured about one per 100k
	// records on SEA before this rule, none after.
	minRise    = 0.005
	minRiseRel = 0.10
	// supportPersist is the number of consecutive retunes a feature must
	// be in (out of) the chosen member's support before it counts as
	// entered (left): the lasso's support of a noisy window flickers at the
	// margin, and two retunes proved too few on stationary streams.
	supportPersist = 3
	// lambdaMoveSteps is the move of λ* that counts as model drift: more
	// than one ladder step, with half a step of slack for the grid's
	// re-anchoring on λ_max (one index step measures 1.0x steps).
	lambdaMoveSteps = 1.5
	// phThreshold is Page-Hinkley's λ on the bounded loss in [0, 1]
	// (window.DefaultPHThreshold, which the window tests measured for
	// values of standard deviation up to 0.3).
	phThreshold = window.DefaultPHThreshold
)

// watch is the drift watch of one model: an observer that runs on the
// model goroutine and raises performance, data and model alerts, and adapts
// the train window after a confirmed performance drift. Its rules:
//
// Warm-up. Nothing is watched until the train window has filled
// (window.records records; for a time-span window or the decay learner,
// which may never reach that count, once n_s train records have arrived).
// At that point the data reference is taken and the performance detector
// starts.
//
// Performance drift. ADWIN (Bifet & Gavaldà 2007) or Page-Hinkley (Page
// 1954), per drift.performance, is fed the current model's test-then-train
// loss on every record (held out or not), mapped onto [0, 1] because
// ADWIN's δ guarantee holds for values in an interval of width 1 (its
// Range): for the logistic loss the Brier term (p − y)² = (1 − e^{−ℓ})²,
// since ℓ = −ln p_y; for the squared loss min(1, (r/(3·s_y))²) with r the
// residual and s_y a robust scale of the target (1.4826·MAD of y over the
// reference sample, falling back to its standard deviation, then 1). Only
// an increase of the mean is a drift; a cut on a decrease (the model
// recovering) is not reported, nor an ADWIN cut whose increase is below
// max(0.005, 10% of the level before) (significant but immaterial; see
// minRise).
//
// Adaptation (drift.adapt). The watch keeps the bounded loss of the
// newest records the model holds, each marked train or held out (the loss
// trail: as many records as the train window and the held-out ring span,
// at most 1<<17; it starts at warm-up and, for the squared loss, starts
// afresh with the detector whenever the target scale is re-estimated).
// After a confirmed performance drift the change point is estimated on it
// (window.EstimateRise: the split that maximizes n0·n1/n·(μ̂1 − μ̂0)² with
// a higher newer mean, the maximum-likelihood change point of Hinkley
// 1970), and the train window and the held-out ring keep exactly the
// records after it: Ladder.Shrink(train records after it) and
// Holdout.KeepNewest(held-out records after it), so λ and the threshold are
// chosen on post-change records. Floor: the cut never leaves fewer than 50
// train records; when fewer than 50 have arrived since the estimated
// change, the cut waits until 50 have (the records in between are
// post-change too), then keeps those and the held-out records among them.
// At the alert ADWIN restarts (Page-Hinkley restarts by itself after a
// signal), so the values of the model that missed the change do not raise
// a second alert while the adapted model recovers. The window then grows
// again with new records up to window.records. The data reference is
// re-taken once n_s train records have arrived after the cut (after a last
// comparison against the old reference); for the squared loss the target
// scale is re-estimated and the detector restarted at that moment.
//
// Data drift. A ring of the newest n_s train records (n_s = window.records/4
// within [500, 1000]) is compared every retune.every train records, once
// n_s records have arrived since the reference was taken (so the two
// samples never overlap), against the reference with window.ShiftReference:
// a feature whose PSI exceeds drift.psi or whose |standardized mean shift|
// exceeds drift.mean_shift is named in one data alert. (The ring keeps each
// value's bin against the reference as records arrive, so a comparison
// does not re-bin the sample; its result is window.ShiftReference.Compare's
// bit for bit, see featureSample.)
//
// Model drift. At every retune the support of the chosen member is
// compared with the stable support: a feature enters (leaves) when it has
// been in (out of) the support at three consecutive retunes. λ* moving by
// more than one ladder step, |ln(λ*/λ_b)| ≥ 1.5 grid steps |ln ε|/(K−1)
// with λ_b the λ* of the last model alert (or of the warm-up), is a model
// drift too. Model drift is checked at retunes, so a model without a
// held-out ring has none.
//
// Alerts of a kind are rate-limited per model by drift.cooldown (see
// alertGate for the clock); a detection held back by the cooldown still
// adapts the window and moves the baselines. Statistic and threshold of
// each kind: performance, the rise of the mean bounded loss and ADWIN's δ,
// or the Page-Hinkley statistic and its λ; data, the largest PSI and
// drift.psi, or when no PSI crossed, the largest |mean shift| and
// drift.mean_shift; model, the move of λ* in ladder steps and 1.5, or the
// number of support changes and 0.
type watch struct {
	model       string
	win         watchedWindow
	at          *moment // the record being applied (owned by the Pipeline)
	retuneEvery int
	cfg         config.Drift
	logistic    bool
	fillAt      int // train records that make the window "filled"

	det  *lossDetector // nil when drift.performance is off
	warm bool
	// trail is the loss trail of the change-point estimate; nil unless
	// drift.adapt and a performance detector are on.
	trail *lossTrail
	// cut is the adaptation waiting for adaptFloor train records after
	// its estimated change point.
	cut pendingCut
	// yScale is s_y of the squared-loss detector input.
	yScale float64

	// data drift
	sample    *featureSample
	ref       *window.ShiftReference
	sinceRef  int  // train records since the reference was taken
	sinceData int  // train records since the last comparison
	retake    bool // re-take the reference once sinceRef >= n_s (after an adaptation)
	shifts    []window.FeatureShift

	// model drift
	support    []bool // stable support
	streak     []int  // consecutive retunes the raw support differed from it
	seenRaw    bool
	baseLambda float64

	gate  alertGate
	stats watchStats

	// alerts raised by the current call, drained by the Pipeline.
	alerts []sink.Alert
	// adapted is set when the current call shrank the window.
	adapted bool
}

// pendingCut is an adaptation whose estimated change point has fewer than
// adaptFloor train records after it: the records since the change point
// (post), and of those, the train and held-out ones.
type pendingCut struct {
	on                bool
	post, train, held int
}

// watchedWindow is what the drift watch needs from the model it watches:
// the sizes of the train window and the held-out ring, and the operations
// that keep only their newest records. The Pipeline implements it over its
// ladder and held-out ring.
type watchedWindow interface {
	// TrainLen is the number of records in the train window.
	TrainLen() int
	// HeldOutLen is the number of records in the held-out ring (0 without one).
	HeldOutLen() int
	// HoldoutPeriod is k of "every k-th record is held out", or 0 without a
	// held-out ring.
	HoldoutPeriod() int
	// KeepNewestTrain keeps only the newest n records of the train window.
	KeepNewestTrain(n int)
	// KeepNewestHeldOut keeps only the newest n records of the held-out ring.
	KeepNewestHeldOut(n int)
}

// watchStats counts what the watch detected, whether or not the cooldown
// let the alert out (tests and logs).
type watchStats struct {
	detected    [4]int // by alertKindIndex
	suppressed  [4]int
	adaptations int
	recoveries  int // detector cuts on a decrease of the loss
	minor       int // ADWIN cuts on an increase below minRise
}

// newWatch returns the drift watch of model m (dim columns wide) over win;
// at is the Pipeline's view of the record being applied.
func newWatch(m *config.Model, dim int, win watchedWindow, at *moment) *watch {
	dc := m.Drift
	n := min(shiftSampleMax, max(shiftSampleMin, m.Window.Records/4))
	wt := &watch{
		model:       m.Name,
		win:         win,
		at:          at,
		retuneEvery: m.Retune.Every,
		cfg:         dc,
		logistic:    m.Logistic(),
		fillAt:      m.Window.Records,
		sample:      newFeatureSample(dim, n),
		support:     make([]bool, dim),
		streak:      make([]int, dim),
		gate:        alertGate{cooldown: dc.Cooldown.Std().Milliseconds()},
	}
	if m.Window.Span > 0 || m.Learner.Kind == config.LearnerDecay {
		wt.fillAt = n
	}
	wt.det = newLossDetector(dc)
	if dc.Adapt && wt.det != nil {
		k := window.Splitter{Every: m.Holdout.Every}.Period()
		if m.HoldoutOff() {
			k = 0
		}
		wt.trail = newLossTrail(trailCap(m, k))
	}
	return wt
}

// observe feeds the detector and the data sample. It does not allocate
// except when an alert is raised.
func (wt *watch) observe(x []float64, y, loss float64, heldOut bool) {
	if !heldOut {
		wt.sample.push(x, y)
		wt.sinceRef++
		wt.sinceData++
	}
	if !wt.warm {
		if heldOut || wt.win.TrainLen() < wt.fillAt || !wt.sample.full() {
			return
		}
		wt.warmUp()
	}
	if !heldOut && wt.sinceData >= wt.retuneEvery {
		wt.sinceData = 0
		wt.checkData()
	}
	if wt.det == nil {
		return
	}
	u := wt.bounded(loss)
	if wt.trail != nil {
		wt.trail.push(u, heldOut)
		wt.cut.count(heldOut)
	}
	c, fired := wt.det.add(u)
	switch {
	case !fired:
	case c.up && (wt.det.ph != nil || c.stat >= max(minRise, minRiseRel*c.before)):
		wt.performanceDrift(c)
	case c.up:
		wt.stats.minor++
	default:
		wt.stats.recoveries++
	}
	wt.makeCut()
}

// retuned checks the support and λ* of the chosen member: standardized
// are its standardized coefficients (read during the call only), lambda
// its λ and step the ladder's step |ln ε|/(K−1) in ln λ (0 for a
// single-member ladder).
func (wt *watch) retuned(standardized []float64, lambda, step float64) {
	if !wt.warm {
		return
	}
	wt.checkModel(standardized, lambda, step)
}

// warmUp takes the first reference and starts watching.
func (wt *watch) warmUp() {
	wt.warm = true
	wt.takeReference()
}

// takeReference snapshots the data sample as the reference and, for the
// squared loss, re-estimates the target scale and restarts the detector.
func (wt *watch) takeReference() {
	wt.ref = wt.sample.reference()
	wt.shifts = wt.shifts[:0]
	wt.sinceRef, wt.sinceData, wt.retake = 0, 0, false
	if !wt.logistic {
		wt.yScale = robustScale(wt.sample.y)
		if wt.det != nil {
			wt.det.reset()
		}
		if wt.trail != nil {
			wt.trail.keepNewest(0) // its values are on the old scale
		}
	}
}

// bounded maps a test-then-train loss onto [0, 1] (see watch).
func (wt *watch) bounded(loss float64) float64 {
	if wt.logistic {
		q := -math.Expm1(-loss) // 1 − p_y = |p − y|
		return q * q
	}
	c := residualSaturation * wt.yScale
	return min(1, 2*loss/(c*c)) // ℓ = r²/2
}

// performanceDrift raises a performance alert and, with drift.adapt,
// estimates the change point and adapts the window to it.
func (wt *watch) performanceDrift(c lossChange) {
	sev := sink.SeverityWarning
	if c.after >= 2*c.before && wt.det.adwin != nil {
		sev = sink.SeverityCritical
	}
	rise := window.Rise{After: -1}
	if wt.trail != nil {
		rise = window.EstimateRise(wt.trail.ring)
		wt.det.reset()
	}
	if wt.gate.allow(sink.KindPerformance, wt.at, &wt.stats) {
		wt.emit(sink.KindPerformance, sev, c.stat, c.threshold, c.width, nil, perfMessage(wt.det, c, rise.After))
	}
	if wt.trail != nil && rise.After > 0 {
		train, held := wt.trail.split(rise.After)
		wt.cut = pendingCut{on: true, post: rise.After, train: train, held: held}
	}
}

// count adds the record just observed to a waiting cut.
func (pc *pendingCut) count(heldOut bool) {
	if !pc.on {
		return
	}
	pc.post++
	if heldOut {
		pc.held++
	} else {
		pc.train++
	}
}

// makeCut adapts the window once a waiting cut has adaptFloor train
// records after its change point.
func (wt *watch) makeCut() {
	if pc := wt.cut; pc.on && pc.train >= adaptFloor {
		wt.cut = pendingCut{}
		wt.adapt(pc.post, pc.train, pc.held)
	}
}

// adapt keeps only the records after the estimated change point: post
// records, of which train went to the train window and held to the
// held-out ring (see watch).
func (wt *watch) adapt(post, train, held int) {
	if train < wt.win.TrainLen() {
		wt.win.KeepNewestTrain(train)
	}
	if wt.win.HoldoutPeriod() >= 2 && held < wt.win.HeldOutLen() {
		wt.win.KeepNewestHeldOut(held)
	}
	wt.trail.keepNewest(post)
	wt.stats.adaptations++
	wt.adapted = true
	wt.retake = true
	wt.sinceRef = 0
}

// checkData compares the newest sample with the reference (see watch) and
// re-takes the reference after an adaptation.
func (wt *watch) checkData() {
	n := wt.sample.size()
	if wt.ref == nil || wt.sinceRef < n {
		return
	}
	wt.shifts = wt.sample.compare(wt.shifts)
	wt.dataAlert()
	if wt.retake {
		wt.takeReference()
	}
}

// dataAlert raises one data alert naming every shifted feature.
func (wt *watch) dataAlert() {
	var worstPSI, worstShift float64
	flagged := 0
	for _, s := range wt.shifts {
		if wt.shifted(s) {
			flagged++
			worstPSI = max(worstPSI, s.PSI)
			worstShift = max(worstShift, math.Abs(s.MeanShift))
		}
	}
	if flagged == 0 {
		return
	}
	stat, thr := worstPSI, wt.cfg.PSI
	if worstPSI <= wt.cfg.PSI {
		stat, thr = worstShift, wt.cfg.MeanShift
	}
	if !wt.gate.allow(sink.KindData, wt.at, &wt.stats) {
		return
	}
	names, msg := dataMessage(wt.shifts, wt.shifted, wt.names())
	wt.emit(sink.KindData, sink.SeverityWarning, stat, thr, wt.sample.size(), names, msg)
}

// shifted reports whether a feature's shift crosses either threshold.
func (wt *watch) shifted(s window.FeatureShift) bool {
	return s.PSI > wt.cfg.PSI || math.Abs(s.MeanShift) > wt.cfg.MeanShift
}

// checkModel updates the stable support and raises a model alert when it
// changed or λ* moved by more than one ladder step.
func (wt *watch) checkModel(standardized []float64, lambda, step float64) {
	if !wt.seenRaw {
		for j, v := range standardized {
			wt.support[j] = v != 0
		}
		wt.seenRaw, wt.baseLambda = true, lambda
		return
	}
	var entered, left []int
	for j, v := range standardized {
		if (v != 0) == wt.support[j] {
			wt.streak[j] = 0
			continue
		}
		if wt.streak[j]++; wt.streak[j] < supportPersist {
			continue
		}
		wt.streak[j] = 0
		wt.support[j] = v != 0
		if v != 0 {
			entered = append(entered, j)
		} else {
			left = append(left, j)
		}
	}
	steps := ladderSteps(step, wt.baseLambda, lambda)
	moved := steps >= lambdaMoveSteps
	if len(entered) == 0 && len(left) == 0 && !moved {
		return
	}
	from := wt.baseLambda
	if moved {
		wt.baseLambda = lambda
	}
	stat, thr := float64(len(entered)+len(left)), 0.0
	if moved {
		stat, thr = steps, lambdaMoveSteps
	}
	if !wt.gate.allow(sink.KindModel, wt.at, &wt.stats) {
		return
	}
	names, msg := modelMessage(wt.names(), entered, left, moved, from, lambda, steps)
	wt.emit(sink.KindModel, sink.SeverityInfo, stat, thr, wt.win.TrainLen(), names, msg)
}

// ladderSteps returns |ln(to/from)| in ladder steps of step (in ln λ); 0
// for a zero step or a non-positive λ.
func ladderSteps(step, from, to float64) float64 {
	if !(step > 0) || !(from > 0) || !(to > 0) {
		return 0
	}
	return math.Abs(math.Log(to/from)) / step
}

// emit queues an alert that passed the gate for the Pipeline.
func (wt *watch) emit(kind sink.AlertKind, sev sink.Severity, stat, thr float64, detector int, features []string, msg string) {
	wt.alerts = append(wt.alerts, sink.Alert{
		Model:     wt.model,
		Kind:      kind,
		Severity:  sev,
		Statistic: stat,
		Threshold: thr,
		Windows:   sink.AlertWindows{Train: wt.win.TrainLen(), Holdout: wt.win.HeldOutLen(), Detector: detector},
		Features:  features,
		Time:      wt.at.recordTime(),
		Seq:       wt.at.seq,
		Message:   msg,
	})
}

// names returns the model's feature names as of the record being applied
// (alerts name a column without a name "#j").
func (wt *watch) names() []string { return wt.at.names }
