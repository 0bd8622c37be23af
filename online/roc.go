package online

import (
	"math"
	"slices"
)

// ROCPoint is one operating point of a scoring rule "alarm when p ≥
// Threshold": the true-positive rate, false-positive rate and precision of
// the alarms it raises (Fawcett 2006, "An introduction to ROC analysis").
type ROCPoint struct {
	Threshold float64 // the probability threshold p of this point
	TPR       float64 // (weighted) fraction of positives with p ≥ Threshold
	FPR       float64 // (weighted) fraction of negatives with p ≥ Threshold
	Precision float64 // positives among the alarms; 1 when there are no alarms
}

// MinPrecisionPositives is the number of positives that must lie at or above
// a threshold chosen by ThresholdForPrecision, so that the precision it
// promises is not estimated from a handful of records (common practice, no
// single source).
const MinPrecisionPositives = 10

// ranked is one scored record: score s, label y (0 or 1) and weight w.
type ranked struct{ s, y, w float64 }

// byScoreDesc orders ranked records from the highest score to the lowest.
// Scores are never NaN here, so plain comparisons suffice.
func byScoreDesc(a, b ranked) int {
	switch {
	case a.s > b.s:
		return -1
	case a.s < b.s:
		return 1
	}
	return 0
}

// rankInputs collects the usable records: finite scores, labels exactly 0 or
// 1, and finite non-negative weights (0 meaning 1, as Record.W). It panics
// when the slice lengths differ, a programmer error.
func rankInputs(probs, labels, weights []float64) []ranked {
	if len(labels) != len(probs) || (weights != nil && len(weights) != len(probs)) {
		panic("online: probs, labels and weights differ in length")
	}
	r := make([]ranked, 0, len(probs))
	for i, p := range probs {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		if w == 0 {
			w = 1
		}
		y := labels[i]
		if math.IsNaN(p) || math.IsInf(p, 0) || (y != 0 && y != 1) || !(w > 0) || math.IsInf(w, 1) {
			continue
		}
		r = append(r, ranked{s: p, y: y, w: w})
	}
	slices.SortFunc(r, byScoreDesc)
	return r
}

// classWeights returns the total weight of positives and of negatives.
func classWeights(r []ranked) (pos, neg float64) {
	for _, v := range r {
		if v.y == 1 {
			pos += v.w
		} else {
			neg += v.w
		}
	}
	return pos, neg
}

// group returns the end (exclusive) of the run of equal scores starting at
// i, and the positive and negative weight in it. r is sorted by byScoreDesc.
func group(r []ranked, i int) (end int, pos, neg float64) {
	// The first element always belongs to its own run, so the loop advances
	// even when the score compares unequal to itself (NaN).
	for end = i; end < len(r) && (end == i || r[end].s == r[i].s); end++ {
		if r[end].y == 1 {
			pos += r[end].w
		} else {
			neg += r[end].w
		}
	}
	return end, pos, neg
}

// aucSorted returns the area under the ROC curve of records sorted by
// byScoreDesc, or NaN when either class is empty. A run of tied scores is one
// diagonal segment, so the trapezoid gives each tied (positive, negative)
// pair half credit (Fawcett 2006, Algorithm 2).
func aucSorted(r []ranked) float64 {
	var area, tp, fp float64
	for i := 0; i < len(r); {
		end, gp, gn := group(r, i)
		area += gn * (tp + gp/2)
		tp += gp
		fp += gn
		i = end
	}
	if tp == 0 || fp == 0 {
		return math.NaN()
	}
	return area / (tp * fp)
}

// AUC returns the area under the ROC curve of scores probs for labels
// (1 positive, 0 negative), weighted by weights (nil for unit weights; a
// weight of 0 means 1, as Record.W). It equals the weighted Mann-Whitney
// statistic: the probability that a random positive scores above a random
// negative, ties counting one half. Records with a non-finite score, a label
// other than 0 or 1, or a negative or non-finite weight are skipped. AUC
// returns NaN when no positive or no negative remains, and panics when the
// slice lengths differ.
func AUC(probs, labels, weights []float64) float64 {
	return aucSorted(rankInputs(probs, labels, weights))
}

// ROC returns the ROC curve of scores probs for labels (1 positive,
// 0 negative), weighted as in AUC: one point per distinct score, from the
// strictest threshold to the loosest. The first point (FPR 0, TPR 0) has a
// threshold just above the highest score; the last, at the lowest score, is
// (1, 1). Tied scores move together, so TPR and FPR never decrease along the
// curve. ROC returns nil when no positive or no negative remains after the
// skipping rules of AUC.
func ROC(probs, labels, weights []float64) []ROCPoint {
	r := rankInputs(probs, labels, weights)
	pos, neg := classWeights(r)
	if pos == 0 || neg == 0 {
		return nil
	}
	pts := []ROCPoint{{Threshold: math.Nextafter(r[0].s, math.Inf(1)), Precision: 1}}
	var tp, fp float64
	for i := 0; i < len(r); {
		end, gp, gn := group(r, i)
		tp += gp
		fp += gn
		pts = append(pts, ROCPoint{Threshold: r[i].s, TPR: min(tp/pos, 1), FPR: min(fp/neg, 1), Precision: tp / (tp + fp)})
		i = end
	}
	// The running sums may round differently from the totals: clamp above
	// and pin the endpoint.
	last := &pts[len(pts)-1]
	last.TPR, last.FPR = 1, 1
	return pts
}

// ThresholdForFPR returns the smallest threshold t, among the observed scores
// and a value just above the highest, such that the fraction of negatives
// (label 0) with p ≥ t is at most target. Ties go to the alarm side: a record
// scoring exactly t counts as an alarm, so all records tied at a score are
// inside or outside together. Records are skipped as in AUC (unit weights).
// ok is false when there is no negative or target is NaN or negative.
func ThresholdForFPR(probs, labels []float64, target float64) (threshold float64, ok bool) {
	r := rankInputs(probs, labels, nil)
	_, neg := classWeights(r)
	if neg == 0 || !(target >= 0) {
		return 0, false
	}
	t := math.Nextafter(r[0].s, math.Inf(1))
	var fp float64
	for i := 0; i < len(r); {
		end, _, gn := group(r, i)
		fp += gn
		if fp/neg > target {
			break
		}
		t = r[i].s
		i = end
	}
	return t, true
}

// ThresholdForPrecision returns the smallest observed score t such that the
// records with p ≥ t (ties are alarms, as in ThresholdForFPR) hold at least
// MinPrecisionPositives positives and a fraction of positives of at least
// target. Records are skipped as in AUC (unit weights). ok is false when
// either class is empty, target is NaN, or no threshold qualifies.
func ThresholdForPrecision(probs, labels []float64, target float64) (threshold float64, ok bool) {
	r := rankInputs(probs, labels, nil)
	pos, neg := classWeights(r)
	if pos == 0 || neg == 0 || math.IsNaN(target) {
		return 0, false
	}
	var tp, fp float64
	for i := 0; i < len(r); {
		end, gp, gn := group(r, i)
		tp += gp
		fp += gn
		if tp >= MinPrecisionPositives && tp/(tp+fp) >= target {
			threshold, ok = r[i].s, true
		}
		i = end
	}
	return threshold, ok
}
