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
	Loss    float64 // mean held-out ℓ of the objective (Loss.Value)
	SE      float64 // standard error of Loss

	// Losses with 0/1 labels (Domain ZeroOne) only, else 0.
	AUC     float64 // area under the ROC curve; 0.5 when a class is missing
	Brier   float64 // mean (p − y)², p = Loss.Mean(η) (Brier 1950)
	LogLoss float64 // mean Bernoulli negative log-likelihood, equal to Loss

	// Losses with real labels (Domain Reals) only, else 0; the residual
	// is y − μ, μ = Loss.Mean(η) (η itself for the squared loss).
	RMSE float64 // √(mean (y − μ)²)
	MAE  float64 // mean |y − μ|
	R2   float64 // 1 − SSE/SST around the held-out mean of y
}

// Score measures every ladder member on the held-out records and returns the
// scores in ladder order, appended to dst[:0] (so a dst with capacity Size()
// makes Score allocation-free). Records whose label lies outside the loss's
// Domain (possible when the holdout was filled without SetLoss) are skipped. Score returns dst[:0] when h holds no usable
// record, and panics if h's feature count differs from the ladder's. It costs
// O(K·n·d) for n held-out records, plus O(K·n log n) for the AUC of a 0/1 loss,
// and uses h's scratch space. Each member's scale is folded into raw-unit
// coefficients once per call, so a record costs one dot product; records
// with a missing value go through Ladder.Eta. The η so computed equals
// Ladder.Eta's to 1e-12 of |b| + Σ|θ_j x̃_j|.
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
	lab := h.labelStats(loss.Domain())
	if lab.w == 0 {
		return dst
	}
	for i := range l.Size() {
		s := Score{Index: i, Lambda: l.Lambda(i), Nonzero: l.Nonzero(i)}
		dst = append(dst, h.score(loss, lab, h.predictor(l, i), s))
	}
	return dst
}

// ScoreModels is Score for the given models instead of the ladder's
// members (for example each member's Optimum): models[i] is scored as
// member i, with its own λ, support and scale. It panics if h's feature
// count differs from the ladder's or a model's from h's.
func (l *Ladder) ScoreModels(h *Holdout, models []Model, dst []Score) []Score {
	if h.d != l.Features() {
		panic(fmt.Sprintf("online: ScoreModels: holdout has %d features, ladder %d", h.d, l.Features()))
	}
	dst = dst[:0]
	loss := l.Loss()
	lab := h.labelStats(loss.Domain())
	if lab.w == 0 {
		return dst
	}
	for i := range models {
		m := &models[i]
		s := Score{Index: i, Lambda: m.Lambda, Nonzero: m.Nonzero()}
		dst = append(dst, h.score(loss, lab, h.modelPredictor(m), s))
	}
	return dst
}

// ModelPredictions is HoldoutPredictions for model m (for example a
// member's Optimum). It panics if m's feature count differs from h's.
func (l *Ladder) ModelPredictions(m *Model, h *Holdout, dst []float64) []float64 {
	loss := l.Loss()
	dst = slices.Grow(dst[:0], h.n)[:h.n]
	p := h.modelPredictor(m)
	for k := range h.n {
		dst[k] = loss.Mean(p.eta(h.record(h.slot(k))))
	}
	return dst
}

// score fills s's metrics from predictor p on the held-out records.
func (h *Holdout) score(loss Loss, lab labelSummary, p predictor, s Score) Score {
	dom := loss.Domain()
	binary := dom == ZeroOne
	var sum, sq, abs, brier float64
	h.rank = h.rank[:0]
	for k := range h.n {
		sl := h.slot(k)
		y, w := h.y[sl], h.w[sl]
		if !dom.Contains(y) {
			h.vals[k] = math.NaN()
			continue
		}
		eta := p.eta(h.record(sl))
		v := loss.Value(y, eta)
		h.vals[k] = v
		sum += w * v
		if binary {
			p := loss.Mean(eta)
			brier += w * (p - y) * (p - y)
			h.rank = append(h.rank, ranked{s: eta, y: y, w: w})
		} else {
			r := y - loss.Mean(eta)
			sq += w * r * r
			abs += w * math.Abs(r)
		}
	}
	s.Loss = sum / lab.w
	s.SE = h.stdErr(s.Loss, lab)
	if binary {
		s.LogLoss, s.Brier = s.Loss, brier/lab.w
		s.AUC = rankAUC(h.rank)
	} else {
		s.RMSE, s.MAE = math.Sqrt(sq/lab.w), abs/lab.w
		s.R2 = rSquared(sq, lab.sst)
	}
	return s
}

// foldLimit bounds max |μ_j|/s_j over a member's support for the folded
// predictor. Folding cancels b' = b − Σ c_j μ_j against cᵀx, which costs
// about eps·|μ_j|/s_j of accuracy relative to |b| + Σ|θ_j x̃_j|: measured
// 6e-14 at |μ|/s ≈ 90 but 5e-13 at ≈ 900 (and 2e-12 on a mean loss) and
// 1e-9 at ≈ 2e6 (TestScoreFoldMatchesEta; rounding analysis, common
// practice, no single source). Beyond the limit, as for a timestamp or an
// offset sensor, the member keeps the standardized form, vectorized.
const foldLimit = 1e2

// predictor is one ladder member's linear predictor prepared for a pass
// over the holdout.
type predictor struct {
	l      *Ladder
	i      int       // member index
	m      *Model    // the model when not a member (modelPredictor)
	raw    bool      // b and c are the folded raw-unit intercept and coefficients
	b      float64   // b' when raw, else the standardized intercept
	c      []float64 // θ_j/s_j (0 where s_j is 0)
	th     []float64 // θ
	mu, iv []float64 // the working scale: means and inverse standard deviations
}

// predictor folds member i's scale into raw-unit coefficients,
// c_j = θ_j/s_j written to h.coef and b' = b − Σ c_j μ_j, so that
// b + x̃ᵀθ = b' + cᵀx: one dot product per record instead of a
// standardization. It keeps the standardized form when folding would lose
// accuracy (foldLimit).
func (h *Holdout) predictor(l *Ladder, i int) predictor {
	b, th := l.members[i].params()
	mu, _, inv := l.scale()
	p := predictor{l: l, i: i, b: b, c: h.coef[:len(th)], th: th, mu: mu, iv: inv}
	var cond float64
	for j, t := range th {
		c := t * inv[j]
		p.c[j] = c
		b -= c * mu[j]
		if c != 0 {
			cond = max(cond, math.Abs(mu[j])*inv[j])
		}
	}
	if cond <= foldLimit {
		p.raw, p.b = true, b
	}
	return p
}

// modelPredictor is predictor for model m: its scale and coefficients
// instead of a member's.
func (h *Holdout) modelPredictor(m *Model) predictor {
	if len(m.Standardized) != h.d {
		panic(fmt.Sprintf("online: model has %d features, the holdout %d", len(m.Standardized), h.d))
	}
	inv := make([]float64, h.d)
	for j, sd := range m.Std {
		if sd > 0 {
			inv[j] = 1 / sd
		}
	}
	b, th := m.StdIntercept, m.Standardized
	p := predictor{m: m, b: b, c: h.coef[:len(th)], th: th, mu: m.Mean, iv: inv}
	var cond float64
	for j, t := range th {
		c := t * inv[j]
		p.c[j] = c
		b -= c * m.Mean[j]
		if c != 0 {
			cond = max(cond, math.Abs(m.Mean[j])*inv[j])
		}
	}
	if cond <= foldLimit {
		p.raw, p.b = true, b
	}
	return p
}

// eta returns the linear predictor on the raw record x. A record with a
// missing value (missing set) takes Ladder.Eta, which counts the value at
// the feature's mean.
func (p *predictor) eta(x []float64, missing bool) float64 {
	switch {
	case missing && p.m != nil:
		return p.m.Eta(x)
	case missing:
		return p.l.Eta(p.i, x)
	case p.raw:
		return p.b + dot(p.c, x)
	}
	return p.b + stdDot(p.th, x, p.mu, p.iv)
}

// record returns the features of the record in slot sl and whether one is
// missing.
func (h *Holdout) record(sl int) (x []float64, missing bool) {
	return h.x[sl*h.d : (sl+1)*h.d : (sl+1)*h.d], h.miss[sl]
}

// labelSummary holds the weight sums and label spread of the usable records.
type labelSummary struct{ w, w2, sst float64 }

// labelStats sums the weights, squared weights and the weighted squared
// deviation of the labels from their weighted mean, over the records Score
// uses (labels in dom).
func (h *Holdout) labelStats(dom Domain) labelSummary {
	var s labelSummary
	var sy float64
	for k := range h.n {
		_, y, w := h.At(k)
		if !dom.Contains(y) {
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
		if !dom.Contains(y) {
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
// oldest first, in dst resized to h.Len(): Loss.Mean(η), the probability
// σ(η) for the logistic loss and the linear predictor η for the squared.
// With Holdout.Labels and Holdout.Weights it feeds ROC, AUC and the
// threshold functions. It uses
// Score's predictor and h's scratch space, and panics if i is out of range
// or h's feature count differs from the ladder's.
func (l *Ladder) HoldoutPredictions(i int, h *Holdout, dst []float64) []float64 {
	if h.d != l.Features() {
		panic(fmt.Sprintf("online: HoldoutPredictions: holdout has %d features, ladder %d", h.d, l.Features()))
	}
	loss := l.Loss()
	dst = slices.Grow(dst[:0], h.n)[:h.n]
	p := h.predictor(l, i)
	for k := range h.n {
		dst[k] = loss.Mean(p.eta(h.record(h.slot(k))))
	}
	return dst
}
