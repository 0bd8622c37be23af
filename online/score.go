package online

import (
	"fmt"
	"math"
	"slices"
)

// Score is one ladder member's performance on the held-out records. Every
// mean is weighted by the records' weights (W = 0 counting as 1).
type Score struct {
	Index   int     // ladder index (0 = λ_max)
	Lambda  float64 // the member's λ
	Nonzero int     // size of its support
	Loss    float64 // mean held-out ℓ of the objective: ½(y − η)² or logistic
	SE      float64 // standard error of Loss

	// Logistic loss only (else 0).
	AUC     float64 // area under the ROC curve; 0.5 when a class is missing
	Brier   float64 // mean (p − y)² (Brier 1950)
	LogLoss float64 // mean logistic loss, equal to Loss

	// Squared loss only (else 0).
	RMSE float64 // √(mean (y − η)²)
	MAE  float64 // mean |y − η|
	R2   float64 // 1 − SSE/SST around the held-out mean of y
}

// Score measures every ladder member on the held-out records and returns the
// scores in ladder order, appended to dst[:0] (so a dst with capacity Size()
// makes Score allocation-free). With the logistic loss, records whose label
// is not 0 or 1 are skipped. Score returns dst[:0] when h holds no usable
// record, and panics if h's feature count differs from the ladder's. It costs
// O(K·n·d) for n held-out records, plus O(K·n log n) for the logistic AUC,
// and uses h's scratch space.
//
// Loss is the weighted mean L = Σwℓ/W of the per-record losses. SE is the
// standard error of a weighted mean of independent losses,
// SE = s·√(Σw²)/W with the reliability-weighted variance
// s² = Σw(ℓ − L)² / (W − Σw²/W); with unit weights this is the sample
// standard deviation over √n. SE is 0 for a single record.
func (l *Ladder) Score(h *Holdout, dst []Score) []Score {
	if h.d != l.Features() {
		panic(fmt.Sprintf("online: Score: holdout has %d features, ladder %d", h.d, l.Features()))
	}
	dst = dst[:0]
	loss := l.Loss()
	_, logistic := loss.(Logistic)
	_, squared := loss.(Squared)
	lab := h.labelStats(logistic)
	if lab.w == 0 {
		return dst
	}
	for i := range l.Size() {
		s := Score{Index: i, Lambda: l.Lambda(i), Nonzero: l.Nonzero(i)}
		var sum, sq, abs, brier float64
		h.rank = h.rank[:0]
		for k := range h.n {
			x, y, w := h.At(k)
			if logistic && y != 0 && y != 1 {
				h.vals[k] = math.NaN()
				continue
			}
			eta := l.Eta(i, x)
			v := loss.Value(y, eta)
			h.vals[k] = v
			sum += w * v
			switch {
			case logistic:
				p := Sigmoid(eta)
				brier += w * (p - y) * (p - y)
				h.rank = append(h.rank, ranked{s: eta, y: y, w: w})
			case squared:
				r := y - eta
				sq += w * r * r
				abs += w * math.Abs(r)
			}
		}
		s.Loss = sum / lab.w
		s.SE = h.stdErr(s.Loss, lab)
		switch {
		case logistic:
			s.LogLoss, s.Brier = s.Loss, brier/lab.w
			s.AUC = rankAUC(h.rank)
		case squared:
			s.RMSE, s.MAE = math.Sqrt(sq/lab.w), abs/lab.w
			s.R2 = rSquared(sq, lab.sst)
		}
		dst = append(dst, s)
	}
	return dst
}

// labelSummary holds the weight sums and label spread of the usable records.
type labelSummary struct{ w, w2, sst float64 }

// labelStats sums the weights, squared weights and the weighted squared
// deviation of the labels from their weighted mean, over the records Score
// uses.
func (h *Holdout) labelStats(logistic bool) labelSummary {
	var s labelSummary
	var sy float64
	for k := range h.n {
		_, y, w := h.At(k)
		if logistic && y != 0 && y != 1 {
			continue
		}
		s.w += w
		s.w2 += w * w
		sy += w * y
	}
	if s.w == 0 {
		return s
	}
	mean := sy / s.w
	for k := range h.n {
		_, y, w := h.At(k)
		if logistic && y != 0 && y != 1 {
			continue
		}
		s.sst += w * (y - mean) * (y - mean)
	}
	return s
}

// stdErr returns the standard error of the weighted mean loss from the
// per-record losses in h.vals (NaN marks a skipped record).
func (h *Holdout) stdErr(mean float64, lab labelSummary) float64 {
	den := lab.w - lab.w2/lab.w
	if !(den > 0) {
		return 0
	}
	var ss float64
	for k, v := range h.vals[:h.n] {
		if math.IsNaN(v) {
			continue
		}
		d := v - mean
		ss += h.w[h.slot(k)] * d * d
	}
	return math.Sqrt(ss/den*lab.w2) / lab.w
}

// rankAUC sorts r in place and returns its AUC, or 0.5 when a class is
// missing so that no NaN leaves Score.
func rankAUC(r []ranked) float64 {
	slices.SortFunc(r, byScoreDesc)
	if a := aucSorted(r); !math.IsNaN(a) {
		return a
	}
	return 0.5
}

// rSquared returns 1 − sse/sst; when the labels are constant (sst = 0) it
// returns 1 for a perfect fit and 0 otherwise, so that no NaN leaves Score.
func rSquared(sse, sst float64) float64 {
	if sst > 0 {
		return 1 - sse/sst
	}
	if sse == 0 {
		return 1
	}
	return 0
}

// HoldoutPredictions returns member i's prediction for every held-out record,
// oldest first, in dst resized to h.Len(): the probability σ(η) for the
// logistic loss, the linear predictor η otherwise. With Holdout.Labels and
// Holdout.Weights it feeds ROC, AUC and the threshold functions. It panics if
// i is out of range or h's feature count differs from the ladder's.
func (l *Ladder) HoldoutPredictions(i int, h *Holdout, dst []float64) []float64 {
	if h.d != l.Features() {
		panic(fmt.Sprintf("online: HoldoutPredictions: holdout has %d features, ladder %d", h.d, l.Features()))
	}
	_, logistic := l.Loss().(Logistic)
	dst = slices.Grow(dst[:0], h.n)[:h.n]
	for k := range h.n {
		x, _, _ := h.At(k)
		eta := l.Eta(i, x)
		if logistic {
			eta = Sigmoid(eta)
		}
		dst[k] = eta
	}
	return dst
}
