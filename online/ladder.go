package online

import (
	"errors"
	"fmt"
	"math"
	"time"
)

// Record is one labeled observation on the model's fixed feature order.
type Record struct {
	X []float64 // len == Features; NaN marks a missing value (imputed with the feature's current window mean at Add)
	Y float64   // label: any finite number (squared), 0 or 1 (logistic)
	W float64   // weight; 0 means 1; must be finite and >= 0
	T int64     // Unix milliseconds; drives Span eviction; 0 = no time
}

// Options configures a Ladder; nil or the zero value gives the defaults
// shown.
type Options struct {
	Loss     Loss          // default Squared{}
	Penalty  *Penalty      // default lasso (Mix 1)
	Features int           // d, required >= 1: the width at the start
	Window   int           // max records in the train window; default 10000
	Span     time.Duration // 0 = none; else records with T < newest.T − Span are evicted (a record with T = 0, no time, only by count)
	Size     int           // K ladder members; default 12
	Floor    float64       // ε, smallest λ = ε·λ_max; default 1e-3
	Lambda   float64       // > 0: one fixed λ (Size forced to 1, no re-anchoring)
	Steps    int           // stochastic steps per arriving record per member; default 2
	Seed     uint64        // PRNG seed (math/rand/v2 PCG); same seed+records => bit-identical
	Learner  string        // "saga" (default), "decay" (FTRL-Proximal, no buffer) or "gram" (squared loss only: exact path from the window's sufficient statistics, gram.go)
	HalfLife float64       // decay learner forgetting half-life in records; default 10000

	// MaxFeatures is the width Grow may reach; default Features (a fixed
	// width).
	MaxFeatures int

	// Unpenalized fits λ = 0 (Size forced to 1, no re-anchoring); Lambda
	// must be 0. The fit exists only where the loss has a unique minimum
	// on the window (no more features than records for the squared loss,
	// no separating hyperplane for the logistic loss).
	Unpenalized bool
}

// Errors returned by NewLadder and Add. Add wraps them with the offending
// feature or value (errors.Is matches).
var (
	ErrDimension = errors.New("online: record has the wrong number of features")
	ErrNotFinite = errors.New("online: non-finite value")
	ErrLabel     = errors.New("online: label outside the loss's domain")
	ErrWeight    = errors.New("online: weight must be finite and non-negative")
	ErrEmpty     = errors.New("online: empty window")
	ErrOptions   = errors.New("online: invalid options")
)

// Input bounds. A feature or label beyond ±maxValue is rejected with
// ErrNotFinite and a weight outside [minWeight, maxWeight] with ErrWeight:
// with both, every sum of w·x² over 10^8 records stays far below the
// largest float64, so no NaN or Inf can arise downstream.
const (
	maxValue  = 1e50
	minWeight = 1e-50
	maxWeight = 1e50
)

// topMargin lifts the top of the grid just above λ_max so that rounding in
// the sums cannot leave member 0 with a stray nonzero coefficient.
const topMargin = 1e-9

// lambdaMixFloor is the α used to anchor the grid when α < 0.001 (ridge):
// λ_max is infinite for α = 0, so the grid is anchored as for α = 0.001,
// the convention of Friedman, Hastie & Tibshirani (2010), §2.5.
const lambdaMixFloor = 1e-3

// Ladder is K penalized GLMs on a log grid of λ, trained on one stream.
// With the default "saga" learner every member minimizes exactly
//
//	F(b, θ) = (1/W) Σ w_i ℓ(y_i, b + x̃_iᵀθ) + λ(α‖θ‖₁ + (1−α)/2‖θ‖²)
//
// over the records now in the train window, by windowed proximal SAGA
// steps; the "decay" learner has no window and forgets with a half-life.
// A Ladder is not safe for concurrent use.
type Ladder struct {
	opt     Options
	d       int
	alpha0  float64 // α of the λ_max anchor
	seen    uint64
	lambdas []float64
	lmax    float64 // λ_max of the current data
	anchor  float64 // λ_max the grid was last anchored on
	members []member
	lrn     learner
	fill    []float64 // lrn.fill()
	dom     Domain    // opt.Loss.Domain()
	xbuf    []float64 // the record being added, missing values imputed
	fresh   []bool    // column j has had no value yet (width.go)
	nfresh  int       // fresh columns
	grid    gridState // grid.go: ratio, extension, ridge spectrum
}

// member is one λ of the ladder, whichever learner trains it.
type member interface {
	// params returns the intercept b and the standardized coefficients θ
	// (the member's own slice, not a copy).
	params() (b float64, theta []float64)
}

// learner trains the members of a ladder: the SAGA learner (saga.go,
// windowed) and the decay learner (decay.go, no window) implement it, and
// Options.Learner picks one in NewLadder. The ladder validates records and
// owns the λ grid: a method that reports true has changed the learner's
// working scale, and the ladder then re-anchors the grid on lambdaMax,
// which calls shift and setLambdas. The interface is wide because it is
// the whole seam between the grid and an optimizer, and the two learners
// differ in nearly every method; a record costs two calls through it (add,
// run). Every method but members, kkt, converge and grow is on the per-record
// path or serves it, and must not allocate.
type learner interface {
	// members returns the members, member i for λ_i.
	members() []member
	// fill returns the values that replace missing features before add
	// (the window means), or nil if add takes NaN as missing. NewLadder
	// asks once: the slice must stay the same, its values current.
	fill() []float64
	// add learns from one validated record of weight w > 0 and time t.
	add(x []float64, y, w float64, t int64) (rescaled bool)
	// run takes steps more optimization steps per member, after add and
	// when idle (none for a learner that learns only in add).
	run(steps int)
	// rescale refreshes a working scale that records arrived since, before
	// idle steps.
	rescale() (rescaled bool)
	// shrink forgets all but the newest n records (or their weight).
	shrink(n int) (rescaled bool)
	// len is Ladder.Len and weight the total record weight, Model.Weight.
	len() int
	weight() float64
	// scale returns the working scale: means, standard deviations and
	// inverse standard deviations (0 for constant features).
	scale() (mu, sd, inv []float64)
	// lambdaMax returns λ_max on the working scale for anchor mix alpha.
	lambdaMax(alpha float64) float64
	// shift re-seats the members after the grid moved by k grid steps
	// (k > 0: λ_max fell), for warm starts; it may do nothing.
	shift(k int)
	// setLambdas gives member i the λ lambdas[i].
	setLambdas(lambdas []float64)
	// kkt is Ladder.KKT and converge is Ladder.Converge (which re-anchors
	// the ladder's grid); a learner without a window returns NaN and false.
	kkt(i int) float64
	converge(l *Ladder, tol float64, maxEpochs int) bool
	// grow widens the learner to n features (Ladder.Grow), reset clears
	// column j (Ladder.ResetFeature) and seed fills fresh column j with its
	// first value v before the record that carries it is added (width.go).
	grow(n int)
	reset(j int)
	seed(j int, v float64)
}

// NewLadder returns an empty ladder configured by o.
func NewLadder(o *Options) (*Ladder, error) {
	opt, err := resolve(o)
	if err != nil {
		return nil, err
	}
	l := &Ladder{
		opt: opt, d: opt.Features, alpha0: max(opt.Penalty.Mix, lambdaMixFloor),
		lambdas: make([]float64, opt.Size), xbuf: make([]float64, opt.Features),
		fresh: make([]bool, opt.Features), nfresh: opt.Features,
		grid: newGridState(&opt),
	}
	for j := range l.fresh {
		l.fresh[j] = true
	}
	switch opt.Learner {
	case "decay":
		l.lrn = newDecay(&opt, opt.Features)
	case "gram":
		l.lrn = newCov(&opt, opt.Features)
	default:
		l.lrn = newSAGA(&opt, opt.Features)
	}
	l.members, l.fill, l.dom = l.lrn.members(), l.lrn.fill(), opt.Loss.Domain()
	if l.fixed() {
		l.lambdas[0] = opt.Lambda
		l.applyLambdas()
	}
	return l, nil
}

// resolve fills the defaults of o and validates it.
func resolve(o *Options) (Options, error) {
	var opt Options
	if o != nil {
		opt = *o
	}
	bad := func(format string, a ...any) (Options, error) {
		return opt, fmt.Errorf("%w: "+format, append([]any{ErrOptions}, a...)...)
	}
	if opt.Loss == nil {
		opt.Loss = Squared{}
	}
	pen := Lasso()
	if opt.Penalty != nil {
		pen = *opt.Penalty
	}
	opt.Penalty = &pen
	switch {
	case opt.Features < 1:
		return bad("features %d < 1", opt.Features)
	case opt.MaxFeatures != 0 && opt.MaxFeatures < opt.Features:
		return bad("max features %d < features %d", opt.MaxFeatures, opt.Features)
	case !(pen.Mix >= 0 && pen.Mix <= 1):
		return bad("penalty mix %v outside [0, 1]", pen.Mix)
	case opt.Window < 0 || opt.Size < 0 || opt.Steps < 0 || opt.Span < 0:
		return bad("negative window, size, steps or span")
	case !(opt.Floor >= 0 && opt.Floor < 1):
		return bad("floor %v outside [0, 1)", opt.Floor)
	case !(opt.Lambda >= 0) || math.IsInf(opt.Lambda, 0):
		return bad("lambda %v", opt.Lambda)
	case opt.Unpenalized && opt.Lambda != 0:
		return bad("unpenalized with lambda %v", opt.Lambda)
	case !(opt.HalfLife >= 0) || math.IsInf(opt.HalfLife, 0):
		return bad("half-life %v", opt.HalfLife)
	case opt.Learner != "" && opt.Learner != "saga" && opt.Learner != "decay" && opt.Learner != "gram":
		return bad("learner %q (allowed: saga, decay, gram)", opt.Learner)
	case opt.Learner == "gram" && !opt.Loss.Quadratic():
		return bad("learner gram needs the squared loss, not %s (use saga or decay)", opt.Loss.Name())
	}
	def := func(v *int, d int) {
		if *v == 0 {
			*v = d
		}
	}
	def(&opt.Window, 10000)
	def(&opt.MaxFeatures, opt.Features)
	def(&opt.Size, 12)
	def(&opt.Steps, 2)
	if opt.Floor == 0 {
		opt.Floor = 1e-3
	}
	if opt.HalfLife == 0 {
		opt.HalfLife = 10000
	}
	if opt.Learner == "" {
		opt.Learner = "saga"
	}
	if opt.Lambda > 0 || opt.Unpenalized {
		opt.Size = 1
	}
	return opt, nil
}

// Add validates r, copies it into the train window (evicting by count and
// span), and takes Steps proximal SAGA steps per member (or one decay
// update). A rejected record returns one of the errors above, wrapped with
// detail, and leaves the ladder untouched. Missing features (NaN) are
// imputed with the feature's current window mean (the running mean of the
// decay learner), which is 0 on the standardized scale and so contributes
// nothing. Add does not allocate.
func (l *Ladder) Add(r Record) error {
	if err := l.check(&r); err != nil {
		return err
	}
	x := r.X
	if l.fill != nil {
		x = l.xbuf
	}
	if l.nfresh > 0 {
		l.seedFresh(r.X)
	}
	w := r.W
	if w == 0 {
		w = 1
	}
	l.seen++
	if l.lrn.add(x, r.Y, w, r.T) {
		l.reanchor(l.lrn.lambdaMax(l.alpha0))
	}
	l.lrn.run(l.opt.Steps)
	return nil
}

// check validates r without changing the ladder; for a learner that fills
// missing values (SAGA) it copies the features to l.xbuf with them imputed
// (kernel impute).
func (l *Ladder) check(r *Record) error {
	if len(r.X) != l.d {
		return fmt.Errorf("%w: got %d, want %d", ErrDimension, len(r.X), l.d)
	}
	if l.fill != nil && impute(l.xbuf, r.X, l.fill, maxValue) {
		return checkLabel(r, l.opt.Loss, l.dom)
	}
	if err := checkFeatures(r.X); err != nil {
		return err
	}
	return checkLabel(r, l.opt.Loss, l.dom)
}

// checkFeatures returns an ErrNotFinite error for the first feature that is
// neither missing (NaN) nor within ±maxValue.
func checkFeatures(x []float64) error {
	for j, v := range x {
		if !(v != v || (v <= maxValue && v >= -maxValue)) {
			return fmt.Errorf("%w: feature %d is %v (limit ±%g)", ErrNotFinite, j, v, maxValue)
		}
	}
	return nil
}

// checkLabel validates the label and weight of r for loss, whose Domain
// is dom (loss nil: any finite label, dom Reals); the Ladder and the
// Holdout share it, so both reject exactly the same records.
func checkLabel(r *Record, loss Loss, dom Domain) error {
	if !(math.Abs(r.Y) <= maxValue) {
		return fmt.Errorf("%w: label is %v (limit ±%g)", ErrNotFinite, r.Y, maxValue)
	}
	if !dom.Contains(r.Y) {
		return fmt.Errorf("%w: %s label %v, want %v", ErrLabel, loss.Name(), r.Y, dom)
	}
	if !(r.W >= 0) || r.W > maxWeight || (r.W > 0 && r.W < minWeight) {
		return fmt.Errorf("%w: %v (allowed 0 or [%g, %g])", ErrWeight, r.W, minWeight, maxWeight)
	}
	return nil
}

// Idle takes steps extra proximal SAGA steps per member, for a quiet
// stream; it first refreshes the working scale if records arrived since the
// last refresh. It does nothing for the decay learner or an empty window.
func (l *Ladder) Idle(steps int) {
	if steps <= 0 || l.lrn.len() == 0 {
		return
	}
	if l.lrn.rescale() {
		l.reanchor(l.lrn.lambdaMax(l.alpha0))
	}
	l.lrn.run(steps)
}

// Ready makes member i current for a read on the record path. The gram
// learner solves on the record path only the members its caller asks for:
// every solveEvery records its members become stale, and Ready solves
// member i when it is stale and keeps the solution (the warm start of its
// next solve). A read of a stale member (Eta, Model, Nonzero, KKT, Score)
// solves a copy each time and keeps nothing, so reads made on a clock (the
// daemon's publications) never change what the ladder computes later; a
// caller that reads a member per record (the pipeline's test-then-train
// loss) calls Ready first, on the record path, so that the member is
// solved once per refresh. The other learners have nothing to do. Ready
// does not allocate.
func (l *Ladder) Ready(i int) {
	if c, ok := l.lrn.(*covLearner); ok {
		c.ensure(i)
	}
}

// Shrink keeps only the newest n records of the train window (for drift
// adaptation); the models stay warm. For the decay learner it discounts the
// accumulated state so that it weighs at most n records.
func (l *Ladder) Shrink(n int) {
	if l.lrn.shrink(n) {
		l.grid.respec = true
		l.reanchor(l.lrn.lambdaMax(l.alpha0))
	}
}

// Len returns the number of records in the train window; for the decay
// learner, the decayed record count Σ 2^(−age/half-life), rounded.
func (l *Ladder) Len() int { return l.lrn.len() }

// Learner returns the learner's name: "saga", "decay" or "gram".
func (l *Ladder) Learner() string { return l.opt.Learner }

// Seen returns the number of records ever accepted.
func (l *Ladder) Seen() uint64 { return l.seen }

// Size returns K, the number of members.
func (l *Ladder) Size() int { return len(l.members) }

// Features returns d, the current width (see Grow).
func (l *Ladder) Features() int { return l.d }

// Lambda returns member i's λ: i = 0 is the largest (λ_max), i = K−1 the
// smallest (ε·λ_max).
func (l *Ladder) Lambda(i int) float64 { return l.lambdas[i] }

// LambdaMax returns λ_max of the current data as of the last refresh of
// the scale: the smallest λ whose lasso (α ≥ 0.001 for the anchor) has every
// coefficient zero.
func (l *Ladder) LambdaMax() float64 { return l.lmax }

// Loss returns the loss.
func (l *Ladder) Loss() Loss { return l.opt.Loss }

// Penalty returns the penalty.
func (l *Ladder) Penalty() Penalty { return *l.opt.Penalty }

// Nonzero returns the number of nonzero coefficients of member i.
func (l *Ladder) Nonzero(i int) int {
	_, th := l.members[i].params()
	n := 0
	for _, v := range th {
		if v != 0 {
			n++
		}
	}
	return n
}

// Eta returns the linear predictor b + x̃ᵀθ of member i on the raw feature
// vector x, standardized with the scale the member was fitted with; a
// missing value (NaN) contributes 0. It panics if len(x) != Features().
func (l *Ladder) Eta(i int, x []float64) float64 {
	if len(x) != l.d {
		panic("online: Eta: wrong number of features")
	}
	b, th := l.members[i].params()
	mu, _, inv := l.scale()
	for j, v := range x {
		if v == v {
			b += th[j] * ((v - mu[j]) * inv[j])
		}
	}
	return b
}

// scale returns the working scale of the learner: means, standard
// deviations and inverse standard deviations (0 for constant features).
func (l *Ladder) scale() (mu, sd, inv []float64) { return l.lrn.scale() }

// reanchor records λ_max of the current data and, unless λ is fixed, moves
// the grid onto its anchor (grid.go): for a penalty with an L1 part
// λ_i = λ_max·(1 + 10⁻⁹)·ε^((i+e)/(K−1)), e the extension (Extend); for
// ridge the degrees-of-freedom anchor (ridgeAnchor). When the top moved by
// half a grid step or more, each SAGA member is first replaced by a warm
// copy of the old member nearest its new λ (pathwise warm starts, Friedman,
// Hastie & Tibshirani 2010, §2.5). The rule: every refresh of the scale
// (every refreshEvery = 32 records, at Idle, Shrink and Converge)
// re-anchors; the ridge spectrum behind the df anchor is recomputed on its
// own schedule (ridgeAnchor).
func (l *Ladder) reanchor(lmax float64) {
	l.lmax = lmax
	if l.fixed() {
		return
	}
	top, ratio := l.anchorOf(lmax)
	ext := min(l.grid.ext, l.maxExtendFor(ratio))
	if top == l.anchor && ratio == l.grid.ratio && ext == l.grid.ext {
		return
	}
	old, oldRatio, oldExt := l.anchor, l.grid.ratio, l.grid.ext
	l.anchor, l.grid.ratio, l.grid.ext = top, ratio, ext
	if l.ridgeGrid() {
		top = l.top() // l.anchor is the df top; λ_max only anchors an L1 part
	} else {
		old *= 1 + topMargin
		top = l.top()
	}
	K := len(l.lambdas)
	if K > 1 && old > 0 && top > 0 && oldRatio > 0 && oldRatio < 1 {
		step := math.Log(oldRatio) / float64(K-1)
		// Old member i sat at ln λ = ln old + (i+oldExt)·step; new member i
		// is nearest to old member i+k.
		pos := math.Log(top*math.Pow(ratio, float64(ext)/float64(K-1))/old) / step
		if k := int(math.Round(pos)) - oldExt; k != 0 {
			l.lrn.shift(max(-K, min(K, k)))
		}
	}
	l.place()
}

// applyLambdas hands the grid to the members.
func (l *Ladder) applyLambdas() { l.lrn.setLambdas(l.lambdas) }
