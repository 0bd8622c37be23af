package online

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// This file places the λ grid of a ladder: where it is anchored (λ_max for
// a penalty with an L1 part, the effective degrees of freedom for ridge)
// and how far below its anchored bottom it is extended when the held-out
// minimum sits at the small-λ end.

// Anchors of a grid, as Grid.Anchor names them.
const (
	// AnchorLambdaMax: member 0 is λ_max (every coefficient zero) and the
	// grid spans Floor·λ_max below it; penalties with α ≥ 0.001.
	AnchorLambdaMax = "lambda_max"
	// AnchorDF: the grid spans the λ at which ridge's effective degrees of
	// freedom are DF[0] and DF[1]; penalties with α < 0.001.
	AnchorDF = "df"
	// AnchorFixed: one fixed λ (Options.Lambda or Options.Unpenalized).
	AnchorFixed = "fixed"
)

// extendFloor bounds the extension: the grid never reaches below
// extendFloor times the bottom of its anchored grid (six decades; for ridge
// that is far below the smallest eigenvalue that counts, so the bottom
// member is unpenalized in all but name).
const extendFloor = 1e-6

// dfEdge is how far from 0 and from the rank the ridge grid's degrees of
// freedom stop: df(λ_0) = dfEdge and df(λ_{K−1}) = rank − dfEdge (half the
// rank when it is 1).
const dfEdge = 0.5

// rankTol is the relative size, against the largest eigenvalue, below which
// an eigenvalue of the standardized Gram matrix counts as zero (common
// practice, no single source: a few thousand ulps of the largest).
const rankTol = 1e-10

// Grid describes how a ladder's λ grid is placed (Ladder.Grid).
type Grid struct {
	// Anchor is AnchorLambdaMax, AnchorDF or AnchorFixed.
	Anchor string
	// Top and Bottom are the λ of members 0 and K−1 of the anchored grid,
	// before any extension; the members are log-spaced between them.
	Top, Bottom float64
	// DF holds, for AnchorDF, the effective degrees of freedom of ridge at
	// Top and Bottom, df(λ) = Σ_j e_j/(e_j + λ) over the eigenvalues e_j of
	// the standardized Gram matrix (1/W)Σ w_i x̃_i x̃_iᵀ of the window
	// (intercept not counted); zero otherwise.
	DF [2]float64
	// Rank is, for AnchorDF, the number of nonzero eigenvalues e_j the df
	// came from; 0 until the first spectrum (and for the decay learner,
	// which keeps no window: it assumes uncorrelated features, e_j = 1).
	Rank int
	// Extended is the number of grid steps the members are shifted below
	// the anchored grid (Ladder.Extend): member i has λ Top·r^((i+Extended)/(K−1)),
	// r = Bottom/Top.
	Extended int
	// MaxExtended bounds Extended: the grid reaches at most
	// 10⁻⁶·Bottom, and for a penalty with an L1 part not below Bottom
	// while the window holds no more records than non-constant features
	// (the lasso path there ends before λ → 0).
	MaxExtended int
}

// gridState is what the ladder keeps of its grid beyond the λ values.
type gridState struct {
	ratio    float64    // Bottom/Top of the anchored grid
	ext      int        // Grid.Extended
	df       [2]float64 // Grid.DF
	rank     int        // Grid.Rank
	specAt   uint64     // records seen at the last spectrum (ridge)
	specLen  int        // window length then
	respec   bool       // a spectrum is due at the next re-anchoring (Shrink, Converge)
	spectrum []float64  // d eigenvalues of the last spectrum, ascending (scratch)
	gram     []float64  // d×d scratch for the Gram matrix
	block    []float64  // gramBlock×d scratch rows
	work     []float64  // lapack workspace
}

// gramBlock is the number of window rows folded into the Gram matrix per
// symmetric rank-k update.
const gramBlock = 64

// spectrumRows is the least number of window records (at least 8d) the
// ridge anchor's Gram matrix is formed from; a longer window is sampled at
// an even stride. The sample's eigenvalues spread around the window's
// (Marchenko–Pastur: by about √(d/m) relative for m rows), which moves the
// grid's ends by a fraction of a grid step; the members are still fitted
// on the whole window, and the extension corrects a bottom set too high.
const spectrumRows = 2000

// spectrumEvery is the number of window lengths of records between two
// spectra of the ridge anchor (as the learner's scheduled resync).
const spectrumEvery = 4

// gramLearner is a learner that can form the standardized Gram matrix of
// its window: the SAGA learner. The ridge grid of a learner without one
// assumes uncorrelated features.
type gramLearner interface {
	// gram writes C = (1/W) Σ w_i x̃_i x̃_iᵀ (upper triangle, d×d row
	// major) into c, using block (gramBlock·d) as scratch, and reports
	// whether the window had any weight. With exact, over every record of
	// the window and x̃ on its exact running scale; else over every s-th
	// record, s = ⌈n/max(spectrumRows, 8d)⌉ (W their weight), on the
	// working scale.
	gram(c, block []float64, exact bool) bool
}

var _ gramLearner = (*sagaLearner)(nil)

// ridgeGrid reports whether the grid is anchored on the degrees of freedom.
func (l *Ladder) ridgeGrid() bool { return l.opt.Penalty.Mix < lambdaMixFloor }

// fixed reports whether λ is fixed (no grid).
func (l *Ladder) fixed() bool { return l.opt.Lambda > 0 || l.opt.Unpenalized }

// newGridState allocates the scratch of the ridge spectrum when needed.
func newGridState(opt *Options) gridState {
	g := gridState{ratio: opt.Floor}
	if opt.Penalty.Mix < lambdaMixFloor && opt.Learner != "decay" && opt.Lambda == 0 && !opt.Unpenalized {
		d := opt.Features
		g.spectrum, g.gram, g.block = make([]float64, d), make([]float64, d*d), make([]float64, gramBlock*d)
		work := []float64{0}
		lapack64.Syev(lapack.EVNone, blas64.Symmetric{N: d, Stride: d, Data: g.gram, Uplo: blas.Upper}, g.spectrum, work, -1)
		g.work = make([]float64, max(1, int(work[0])))
	}
	return g
}

// anchorOf returns the top and the bottom/top ratio of the anchored grid for
// λ_max lmax: (λ_max·(1 + 10⁻⁹), Floor) for a penalty with an L1 part; for
// ridge the df anchor (ridgeAnchor).
func (l *Ladder) anchorOf(lmax float64) (top, ratio float64) {
	if !l.ridgeGrid() {
		return lmax * (1 + topMargin), l.opt.Floor
	}
	return l.ridgeAnchor()
}

// ridgeAnchor returns the ridge grid's top and ratio: λ_0 with
// df(λ_0) = 0.5 and λ_{K−1} with df(λ_{K−1}) = rank − 0.5, from the
// eigenvalues of the window's standardized Gram matrix (formed from at
// most max(spectrumRows, 8d) of its records, see gram). The spectrum is
// recomputed when spectrumEvery window lengths of records have arrived
// since the last one (every max(32, 4n) records seen, n the window length
// then: a few times while the window fills, then as often as the
// learner's scheduled resync), and at Shrink and Converge; it costs
// O(m·d²) for the Gram matrix of m records and O(d³) for the eigenvalues
// (LAPACK dsyev, gonum v0.17.0). The grid's λ do not depend on the label's
// scale, only on the correlations of the features, so between spectra the
// grid stays put while λ_max moves. Before any spectrum, and for the decay
// learner, uncorrelated features are assumed (every e_j = 1).
func (l *Ladder) ridgeAnchor() (top, ratio float64) {
	g := &l.grid
	if l.anchor > 0 && !g.respec && l.seen-g.specAt < uint64(max(refreshEvery, spectrumEvery*g.specLen)) {
		return l.anchor, g.ratio
	}
	_, windowed := l.lrn.(gramLearner)
	l.respectrum()
	e, r := g.spectrum, g.rank
	if r == 0 {
		if windowed && l.anchor > 0 {
			return l.anchor, g.ratio
		}
		e, r = nil, max(1, nonConstant(l))
	}
	edge := min(dfEdge, float64(r)/4)
	g.df = [2]float64{edge, float64(r) - edge}
	top = solveDF(e, r, g.df[0])
	return top, solveDF(e, r, g.df[1]) / top
}

// nonConstant returns the number of features with a nonzero scale.
func nonConstant(l *Ladder) int {
	_, _, inv := l.scale()
	p := 0
	for _, v := range inv {
		if v != 0 {
			p++
		}
	}
	return p
}

// respectrum recomputes the eigenvalues of the standardized Gram matrix of
// the window into g.spectrum and the rank; without a window (decay
// learner) or with an empty one the rank is 0.
func (l *Ladder) respectrum() {
	g := &l.grid
	g.respec, g.specAt, g.specLen, g.rank = false, l.seen, l.Len(), 0
	gl, ok := l.lrn.(gramLearner)
	if !ok || g.gram == nil || !gl.gram(g.gram, g.block, false) {
		return
	}
	d := l.d
	a := blas64.Symmetric{N: d, Stride: d, Data: g.gram, Uplo: blas.Upper}
	if !lapack64.Syev(lapack.EVNone, a, g.spectrum, g.work, len(g.work)) {
		return
	}
	g.rank = Rank(g.spectrum)
}

// Rank returns the number of eigenvalues in e (ascending, as Spectrum
// returns them) above 10⁻¹⁰ times the largest: the rank of the
// standardized Gram matrix, the number of directions in which the window's
// features vary independently.
func Rank(e []float64) int {
	if len(e) == 0 || !(e[len(e)-1] > 0) {
		return 0
	}
	r := 0
	for _, v := range e {
		if v > rankTol*e[len(e)-1] {
			r++
		}
	}
	return r
}

// solveDF returns the λ > 0 at which Σ_j e_j/(e_j + λ) over the r largest
// eigenvalues e (ascending; nil: r eigenvalues equal to 1) equals target
// in (0, r), by bisection on log λ (df decreases in λ).
func solveDF(e []float64, r int, target float64) float64 {
	df := func(lam float64) float64 {
		if e == nil {
			return float64(r) / (1 + lam)
		}
		var s float64
		for _, v := range e[len(e)-r:] {
			s += v / (v + lam)
		}
		return s
	}
	lo, hi := -80.0, 80.0 // ln λ; e_j ≤ d ≤ 2^20 keeps the root inside
	for range 200 {
		mid := (lo + hi) / 2
		if df(math.Exp(mid)) > target {
			lo = mid
		} else {
			hi = mid
		}
		if hi-lo < 1e-12 {
			break
		}
	}
	return math.Exp((lo + hi) / 2)
}

// maxExtend returns the bound on the extension (Grid.MaxExtended) for the
// current ratio.
func (l *Ladder) maxExtend() int { return l.maxExtendFor(l.grid.ratio) }

// maxExtendFor is maxExtend for an anchored grid of ratio Bottom/Top.
func (l *Ladder) maxExtendFor(ratio float64) int {
	K := len(l.lambdas)
	if K < 3 || l.fixed() || !(ratio > 0 && ratio < 1) {
		return 0
	}
	if !l.ridgeGrid() && l.Len() <= nonConstant(l) {
		return 0
	}
	return int(math.Floor(float64(K-1)*math.Log(extendFloor)/math.Log(ratio) + 1e-9))
}

// ExtendStep returns the number of members Extend moves the grid by:
// max(1, K/4), or 0 (no extension) for a ladder of fewer than three
// members or a fixed λ.
func (l *Ladder) ExtendStep() int {
	if l.fixed() {
		return 0
	}
	return extendStep(len(l.lambdas))
}

// extendStep is ExtendStep for a ladder of k members.
func extendStep(k int) int {
	if k < 3 {
		return 0
	}
	return max(1, k/4)
}

// Extend moves the grid after the ladder was scored on held-out data, best
// being the member with the lowest held-out loss and chosen the member in
// use (the selection rule's, after hysteresis). When best is the last
// (smallest λ) member and chosen is at least s = max(1, K/4), the grid
// moves down by s members (fewer at the bound Grid.MaxExtended) instead of
// stopping at its floor; when the grid is extended and both best and
// chosen are among the first s members, it moves back up by s (at most to
// the anchored grid). The two conditions cannot undo each other's move for
// K ≥ 3. The members are re-seated as warm copies of their nearest
// neighbours, as when λ_max moves. Extend returns the members moved: > 0
// down (member i is now the old member i+k), < 0 up, 0 none; the caller
// re-indexes what it keeps by member (Chooser.Shift). A fixed-λ ladder
// never moves.
func (l *Ladder) Extend(best, chosen int) int {
	K := len(l.lambdas)
	s := extendStep(K)
	if s == 0 || l.fixed() || l.anchor == 0 {
		return 0
	}
	g := &l.grid
	k := 0
	switch {
	case best == K-1 && chosen >= s:
		k = min(s, l.maxExtend()-g.ext)
	case g.ext > 0 && best >= 0 && best < s && chosen < s:
		k = -min(s, g.ext)
	}
	if k == 0 {
		return 0
	}
	l.lrn.shift(k)
	g.ext += k
	l.place()
	return k
}

// place sets λ_i = Top·ratio^((i+ext)/(K−1)) and hands the grid to the
// members.
func (l *Ladder) place() {
	top := l.top()
	K := len(l.lambdas)
	for i := range l.lambdas {
		l.lambdas[i] = top
		if K > 1 {
			l.lambdas[i] = top * math.Pow(l.grid.ratio, float64(i+l.grid.ext)/float64(K-1))
		}
	}
	l.applyLambdas()
}

// top returns λ of member 0 of the anchored grid.
func (l *Ladder) top() float64 {
	if l.ridgeGrid() {
		return l.anchor
	}
	return l.anchor * (1 + topMargin)
}

// Grid returns how the λ grid is placed now.
func (l *Ladder) Grid() Grid {
	if l.fixed() {
		return Grid{Anchor: AnchorFixed, Top: l.lambdas[0], Bottom: l.lambdas[0]}
	}
	g := Grid{Anchor: AnchorLambdaMax, Top: l.top(), Extended: l.grid.ext, MaxExtended: max(l.maxExtend(), l.grid.ext)}
	g.Bottom = g.Top * l.grid.ratio
	if l.ridgeGrid() {
		g.Anchor, g.DF, g.Rank = AnchorDF, l.grid.df, l.grid.rank
	}
	return g
}

// Spectrum returns the eigenvalues (ascending) of the standardized Gram
// matrix (1/W) Σ w_i x̃_i x̃_iᵀ of the window, x̃ standardized with the
// window's exact mean and std, computed now (O(n·d²) + O(d³)), or nil for
// the decay learner (no window). A constant feature adds a zero
// eigenvalue. It does not change the ladder.
func (l *Ladder) Spectrum() []float64 {
	gl, ok := l.lrn.(gramLearner)
	if !ok {
		return nil
	}
	d := l.d
	c, block, e := make([]float64, d*d), make([]float64, gramBlock*d), make([]float64, d)
	if !gl.gram(c, block, true) {
		return e
	}
	a := blas64.Symmetric{N: d, Stride: d, Data: c, Uplo: blas.Upper}
	work := []float64{0}
	lapack64.Syev(lapack.EVNone, a, e, work, -1)
	work = make([]float64, max(1, int(work[0])))
	if !lapack64.Syev(lapack.EVNone, a, e, work, len(work)) {
		return nil
	}
	return e
}

// gram is gramLearner.gram for the SAGA learner: the window's rows in
// window order (all, or every stride-th; a pending admission's row from
// the ladder's buffer), standardized and weighted by √w, folded into c by
// blocks of gramBlock rows with a symmetric rank-k update (BLAS dsyrk).
func (s *sagaLearner) gram(c, block []float64, exact bool) bool {
	ts := s.ts
	d := ts.d
	clear(c)
	if !(ts.sc.w > 0) {
		return false
	}
	mu, inv := ts.mu, ts.inv
	if exact {
		mu, inv = s.scr.mu, s.scr.inv
		for j := range mu {
			mu[j] = ts.sc.mean[j]
			_, inv[j] = ts.sc.scale(j)
		}
	}
	slots := ts.order()
	stride, w := 1, ts.sc.w
	if m := max(spectrumRows, 8*d); !exact && len(slots) > m {
		stride, w = (len(slots)+m-1)/m, 0
		for i := 0; i < len(slots); i += stride {
			w += ts.ring.At(i).w
		}
	}
	out := blas64.Symmetric{N: d, Stride: d, Data: c, Uplo: blas.Upper}
	rows := 0
	flush := func() {
		if rows > 0 {
			blas64.Syrk(blas.Trans, 1/w, blas64.General{Rows: rows, Cols: d, Stride: d, Data: block[:rows*d]}, 1, out)
			rows = 0
		}
	}
	for i := 0; i < len(slots); i += stride {
		sl := slots[i]
		x := ts.row(sl)
		if s.pending && sl == s.pslot {
			x = s.pend
		}
		rw := math.Sqrt(ts.ring.At(i).w)
		z := block[rows*d : (rows+1)*d]
		for j, v := range x {
			z[j] = (v - mu[j]) * inv[j] * rw
		}
		if rows++; rows == gramBlock {
			flush()
		}
	}
	flush()
	return true
}
