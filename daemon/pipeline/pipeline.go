package pipeline

import (
	"errors"
	"fmt"
	"hash/fnv"
	"math"
	"slices"
	"time"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/window"
)

// DefaultMinPublish is Options.MinPublish when it is 0.
const DefaultMinPublish = time.Second

// Options configures a Pipeline; only Model is required.
type Options struct {
	// Model is the model's configuration, validated (config.Load or
	// config.DefaultModel with its fields set). It must not change
	// afterwards.
	Model *config.Model
	// MinPublish is the least time between two versions that Publish does
	// not force (the heartbeat and a forced publication always go out);
	// default DefaultMinPublish.
	MinPublish time.Duration
	// Threshold replaces the configured threshold mode and target of a
	// logistic model (a change saved at runtime); nil keeps the
	// configuration's.
	Threshold *Threshold
	// Seed seeds the learner's random generator; 0 derives it from the
	// model's name (the daemon's choice, so a model's bits do not depend on
	// its position in the configuration).
	Seed uint64
	// Exact bounds the exact fits of the published model and of the
	// members scored at a retune (online.Ladder.Optimum); nil gives its
	// defaults (KKT tolerance online.DefaultKKT, 30 rounds).
	Exact *online.ExactOptions
	// Unpenalized fits λ = 0, one learner and no ladder (lariat fit
	// --lambda 0; a configuration cannot ask for it: its lambda 0 means
	// "choose λ"). The model's Lambda must be 0.
	Unpenalized bool
}

// Pipeline is everything one model knows: the ladder, the held-out ring and
// its splitter, the λ chooser, the drift watch, the threshold tuner, the
// version and the last published document. It has no goroutines, no I/O and
// no clock of its own: time comes from the record or is passed in. It is
// not safe for concurrent use; one goroutine owns it.
type Pipeline struct {
	cfg        *config.Model
	name       string
	dim        int
	minPublish time.Duration

	ladder   *online.Ladder
	upgraded bool            // Restore took a SAGA ladder over into a gram ladder
	hold     *online.Holdout // nil when the holdout is off
	chooser  online.Chooser
	split    window.Splitter

	seq         uint64 // records applied (train + held out)
	held        uint64 // records applied to the holdout
	sinceRetune int
	// adopt is set by a drift adaptation: while the train window grows
	// back, every retune adopts its choice of λ* at once (the chooser's
	// hysteresis would protect a choice made on a smaller window, or on
	// pre-change records, which no longer count).
	adopt  bool
	scores []online.Score

	at    moment
	watch *watch
	tuner *tuner // nil for a squared-loss model
	guard *guard

	span    bool  // the train window has a time span
	newestT int64 // the newest record time applied (Unix ms), 0 before one

	freed    uint64 // columns reset because their slot changed hands (width.go)
	version  uint64
	last     *sink.ModelDoc
	lastPub  time.Time
	position uint64 // the last stream sequence applied or rejected (durable intake)

	step Step

	// The exact fits (online.Ladder.Optimum). They start from the
	// streaming members, so they follow from the state alone and are not
	// saved: fits holds every member's fit at the last retune (scored in
	// its place, nil before one or after a restore), pub the last fit of
	// the published member, reused while no record arrived.
	exact  ExactOptions
	fits   []online.Model
	path   []online.Optimum
	decide []bool
	pub    exactFit
}

// ExactOptions is online.ExactOptions with its defaults filled in.
type ExactOptions = online.ExactOptions

// exactFit is one exact fit of the published member and what it depends on.
type exactFit struct {
	ok     bool
	seen   uint64
	index  int
	lambda float64
	at     time.Time // when Publish or Document made it; zero at a retune
	opt    online.Optimum
}

// moment is what the policies know of the record being applied: its time,
// the wall-clock time passed in, its sequence number and the feature names.
type moment struct {
	recT  int64 // Unix ms of the record; 0 without "t"
	now   time.Time
	seq   uint64
	names []string
}

// stamp returns the alert clock: the record's time when it has one, else
// the wall-clock time passed in.
func (m *moment) stamp() (at int64, record bool) {
	if m.recT != 0 {
		return m.recT, true
	}
	return m.now.UnixMilli(), false
}

// recordTime returns the record's time, or the zero time without one.
func (m *moment) recordTime() time.Time {
	if m.recT == 0 {
		return time.Time{}
	}
	return time.UnixMilli(m.recT).UTC()
}

// Step is what applying one record did. Its slices are reused by the next
// call to Apply.
type Step struct {
	// HeldOut is set when the record went to the held-out ring.
	HeldOut bool
	// Retuned is set when the ladder was rescored on the held-out ring.
	Retuned bool
	// Moved is set when the retune moved λ*.
	Moved bool
	// Extended is the number of members the retune moved the ladder's grid
	// down by, because the held-out minimum sat at its smallest λ (< 0: back
	// up; online.Ladder.Extend); the new members are scored at the next
	// retune.
	Extended int
	// ROC is the chosen member's new ROC table on the held-out ring
	// (logistic models, after a retune); nil otherwise.
	ROC []online.ROCPoint
	// Adapted is set when a drift adaptation cut the train window and the
	// held-out ring to the records after the estimated change point: at
	// the performance alert, or when the 50th train record after that
	// point arrived (see the drift watch in watch.go).
	Adapted bool
	// Alerts are the drift alerts the record raised (already past their
	// cooldown).
	Alerts []sink.Alert
}

// Width returns the most columns model m's ladder and records can have: its
// feature cap, or its fixed feature list if that is longer. The ladder
// starts as wide as the fixed list and grows with the names learned
// (width.go).
func Width(m *config.Model) int { return max(m.MaxFeatures, len(m.Features)) }

// New returns the pipeline of o.Model, empty.
func New(o Options) (*Pipeline, error) {
	m := o.Model
	if m == nil {
		return nil, errors.New("pipeline: no model")
	}
	loss, ok := online.LossByName(m.Loss)
	if !ok {
		return nil, fmt.Errorf("pipeline: model %s: unknown loss %q", m.Name, m.Loss)
	}
	rule, err := online.ParseRule(m.Retune.Rule)
	if err != nil {
		return nil, fmt.Errorf("pipeline: model %s: %w", m.Name, err)
	}
	if o.Threshold != nil {
		if err := CheckThreshold(o.Threshold.Mode, o.Threshold.Target); err != nil {
			return nil, fmt.Errorf("pipeline: model %s: %w", m.Name, err)
		}
	}
	dim := Width(m)
	seed := o.Seed
	if seed == 0 {
		h := fnv.New64a()
		h.Write([]byte(m.Name))
		seed = h.Sum64()
	}
	start := max(1, len(m.Features))
	lad, err := online.NewLadder(&online.Options{
		Loss:        loss,
		Penalty:     &online.Penalty{Mix: m.PenaltyMix()},
		Features:    start,
		MaxFeatures: dim,
		Window:      m.Window.Records,
		Span:        m.Window.Span.Std(),
		Size:        m.Ladder.Size,
		Floor:       m.Ladder.Floor,
		Lambda:      m.Lambda,
		Unpenalized: o.Unpenalized,
		Steps:       m.Learner.Steps,
		Seed:        seed,
		Learner:     m.Learner.EffectiveKind(m.Loss),
		HalfLife:    m.Learner.HalfLife,
	})
	if err != nil {
		return nil, fmt.Errorf("pipeline: model %s: %w", m.Name, err)
	}
	p := &Pipeline{
		cfg:        m,
		name:       m.Name,
		dim:        dim,
		minPublish: o.MinPublish,
		ladder:     lad,
		chooser:    online.Chooser{Rule: rule},
		split:      window.Splitter{Every: m.Holdout.Every, ByKey: m.Holdout.ByKey},
	}
	if p.minPublish <= 0 {
		p.minPublish = DefaultMinPublish
	}
	if o.Exact != nil {
		p.exact = *o.Exact
	}
	if !(p.exact.Tol > 0) {
		p.exact.Tol = online.DefaultKKT
	}
	if m.HoldoutOff() {
		p.split.Every = -1 // window.Splitter: < 2 (and not 0) disables the split
	} else {
		p.hold = online.NewHoldout(start, m.Holdout.Records)
	}
	p.watch = newWatch(m, start, trainWindow{p}, &p.at)
	p.tuner = newTuner(m, o.Threshold)
	p.guard = newGuard(m, dim)
	p.span = m.Window.Span > 0
	return p, nil
}

// Name returns the model's name.
func (p *Pipeline) Name() string { return p.name }

// Width returns the most columns the pipeline's records can have (see the
// function Width); Ladder().Features() is the current width.
func (p *Pipeline) Width() int { return p.dim }

// Apply applies one decoded record: the held-out ring takes every k-th
// record and the ladder the others, after the current model's
// test-then-train loss on it has fed the drift watch; every retune.every
// records the ladder is rescored, λ* chosen and the threshold tuned. names
// is the decoder's feature order when rec was decoded; rec.X is extended to
// the ladder's width with NaN (missing), in its own capacity when it has
// room; a name in a slot that changed hands since the last record resets
// that column first (width.go). now is the wall-clock
// time that stands in for the record's own time when it has none (alert
// cooldowns). A record of the wrong width, one outside the configured
// bounds or too far from a channel's recent values (see guard), or one the
// learner refuses leaves the model untouched and gives a *record.Error with
// the reject reason.
func (p *Pipeline) Apply(rec *record.Record, names []string, now time.Time) (*Step, error) {
	st := &p.step
	*st = Step{Alerts: st.Alerts[:0]}
	if len(rec.X) > p.dim || len(names) > p.dim {
		return st, &record.Error{Reason: record.ReasonDimension,
			Detail: fmt.Sprintf("record has %d columns, the model at most %d", max(len(rec.X), len(names)), p.dim)}
	}
	due, err := p.layoutDue(rec, names)
	if err != nil {
		return st, err
	}
	if err := p.guard.check(rec.X, rec.Y, names); err != nil {
		return st, err
	}
	if due {
		p.layout(rec, names)
	}
	for d := p.ladder.Features(); len(rec.X) < d; { // names not learned yet are missing
		rec.X = append(rec.X, math.NaN())
	}
	r := rec.Learn()
	recT := r.T
	if r.T == 0 && p.span {
		// A record without a time takes the newest time seen, so it
		// neither moves the span nor is evicted before the records around
		// it (window.Timed's convention): stamped 0, one timed record
		// would evict every untimed one.
		r.T = p.newestT
	}
	heldOut := p.split.Holdout(p.seq, rec.Key)
	// Test-then-train: the current model's loss on the record before it
	// learns from it (an honest out-of-sample loss for the drift watch).
	// Ready solves the member when the gram learner left it stale.
	cur := max(p.current(), 0)
	p.ladder.Ready(cur)
	loss := p.ladder.Loss().Value(r.Y, p.ladder.Eta(cur, r.X))
	if heldOut {
		err = p.hold.Add(r)
	} else {
		err = p.ladder.Add(r)
	}
	if err != nil {
		return st, &record.Error{Reason: learnerReason(err), Detail: err.Error()}
	}
	p.guard.learn(r.X, r.Y)
	p.newestT = max(p.newestT, r.T)
	p.seq++
	if heldOut {
		p.held++
	}
	st.HeldOut = heldOut
	p.at.recT, p.at.now, p.at.seq = recT, now, p.seq
	p.watch.observe(r.X, r.Y, loss, heldOut)
	p.watch.rereference()
	p.collect()
	if p.sinceRetune++; p.sinceRetune >= p.cfg.Retune.Every {
		p.retune()
	}
	return st, nil
}

// collect moves what the watch raised during a call into the step.
func (p *Pipeline) collect() {
	st := &p.step
	st.Alerts = append(st.Alerts, p.watch.alerts...)
	p.watch.alerts = p.watch.alerts[:0]
	if p.watch.adapted {
		st.Adapted, p.watch.adapted = true, false
		p.adopt = true
	}
}

// learnerReason maps the ladder's validation errors onto reject reasons.
func learnerReason(err error) string {
	switch {
	case errors.Is(err, online.ErrDimension):
		return record.ReasonDimension
	case errors.Is(err, online.ErrNotFinite):
		return record.ReasonNotFinite
	case errors.Is(err, online.ErrLabel):
		return record.ReasonLabel
	case errors.Is(err, online.ErrWeight):
		return record.ReasonWeight
	}
	return "invalid"
}

// Retune rescores the ladder on the held-out ring now, as Apply does every
// retune.every records (tools that fit a whole file at once call it after
// Converge), and returns what it did.
func (p *Pipeline) Retune() *Step {
	st := &p.step
	*st = Step{Alerts: st.Alerts[:0]}
	p.retuneWith(true)
	return st
}

// Converge runs the learner on the current window until every ladder
// member's KKT violation is at most tol or maxEpochs epochs have run
// (online.Ladder.Converge), and reports whether all converged. It is the
// batch finish of tools such as lariat fit; the daemon never calls it.
func (p *Pipeline) Converge(tol float64, maxEpochs int) bool {
	return p.ladder.Converge(tol, maxEpochs)
}

// retune scores the ladder on the held-out ring and lets the chooser move
// λ* (with hysteresis), then lets the drift watch check the chosen model
// and the tuner re-tune the threshold. A fixed-λ model or an empty holdout
// skips it.
func (p *Pipeline) retune() { p.retuneWith(p.exactDue()) }

// exactDue reports whether the retune now due fits the ladder members
// exactly before scoring them: at every retune while the first window
// fills (the first choices of λ), then once per window length of records
// (window.records; the retunes in between, every retune.every records,
// score the streaming members). An exact fit of every member reads the
// whole window (O(n·d²) for the squared loss), so at every retune it would
// cost many times the streaming step per record. The gram learner (the
// default for the squared loss) fits at every retune: its members come from
// the window's sums in O(d²) each, with no pass over the records. The rule depends only on
// the records applied, so a restored pipeline decides as the uninterrupted
// one.
func (p *Pipeline) exactDue() bool {
	if p.ladder.Learner() == config.LearnerGram {
		return true
	}
	n, since := uint64(max(p.cfg.Window.Records, 1)), uint64(p.sinceRetune)
	return p.seq <= n || since > p.seq || p.seq/n != (p.seq-since)/n
}

// retuneWith is retune, with the members fitted exactly first when exact
// is set (support honesty) and scored as they stream otherwise.
func (p *Pipeline) retuneWith(exact bool) {
	p.sinceRetune = 0
	if p.hold == nil || p.hold.Len() == 0 || p.ladder.Len() == 0 {
		return
	}
	if exact {
		p.fitMembers()
		p.scores = p.ladder.ScoreModels(p.hold, p.fits, p.scores[:0])
	} else {
		p.fits = p.fits[:0] // fitted: the streaming members
		p.scores = p.ladder.Score(p.hold, p.scores[:0])
	}
	idx, changed := p.choose()
	p.step.Retuned, p.step.Moved = true, changed
	if k := p.ladder.Extend(online.Choose(p.scores, online.RuleMin), idx); k != 0 {
		p.shiftScores(k)
		idx = p.chooser.Current()
		p.step.Extended = k
	}
	if idx >= 0 && p.watch.warm {
		m := p.fitted(idx)
		p.watch.retuned(m.Standardized, p.ladder.Lambda(idx), p.gridStep())
		p.collect()
	}
	if p.tuner != nil {
		p.tuner.tune(p, idx)
		p.step.ROC = p.tuner.roc
	}
}

// fitted returns member i's exact fit from the last retune while it is
// still that member's (the same λ and width: a grid extension or a wider
// model since makes it stale), else the streaming member.
func (p *Pipeline) fitted(i int) online.Model {
	if i < len(p.fits) && p.fits[i].Lambda == p.ladder.Lambda(i) && len(p.fits[i].Standardized) == p.ladder.Features() {
		return p.fits[i]
	}
	return p.ladder.Model(i)
}

// contention reports which ladder members decide the choice of λ on the
// streaming scores: the rule's pick and its two neighbours, the member of
// lowest loss (whose loss and SE set the one-SE limit) and the current
// choice (kept by hysteresis). The streaming members' blur moves a
// held-out loss by an amount of second order in their distance from the
// optimum (0.26 % median, measured on a stationary stream at the defaults), so the members outside,
// clearly worse or clearly not the pick, keep their streaming scores.
func contention(scores []online.Score, rule online.Rule, cur int, in []bool) []bool {
	in = append(in[:0], make([]bool, len(scores))...)
	mark := func(i int) {
		if i >= 0 && i < len(in) {
			in[i] = true
		}
	}
	pick := online.Choose(scores, rule)
	if pick >= 0 {
		mark(pick - 1)
		mark(pick)
		mark(pick + 1)
	}
	mark(online.Choose(scores, online.RuleMin))
	mark(cur)
	return in
}

// fitMembers fits the members exactly on the current window before they
// are scored (support honesty: λ* is chosen among members at their
// optimum, to the KKT tolerance). For the squared loss every member, from
// the window's Gram matrix (online.Ladder.OptimumPath, one pass over the
// window); for other losses the members that decide the choice on the
// streaming scores (contention), each by its own exact fit
// to the KKT tolerance (without the margin below it that the published
// fit takes for exact zeros), while the others keep their streaming
// models. The fit of the current
// member is kept for the next publication.
func (p *Pipeline) fitMembers() {
	cur := p.current()
	p.fits = p.fits[:0]
	if p.ladder.Loss().Quadratic() {
		p.path = p.ladder.OptimumPath(&p.exact, p.path[:0])
		for _, o := range p.path {
			p.fits = append(p.fits, o.Model)
		}
		return
	}
	p.scores = p.ladder.Score(p.hold, p.scores[:0])
	p.decide = contention(p.scores, p.chooser.Rule, cur, p.decide)
	for i := range p.ladder.Size() {
		if !p.decide[i] {
			p.fits = append(p.fits, p.ladder.Model(i))
			continue
		}
		score := p.exact
		score.Target = score.Tol // scoring needs the tolerance, not the margin for exact zeros
		if i == cur {
			score = p.exact
		}
		opt := p.ladder.Optimum(i, nil, &score)
		p.fits = append(p.fits, opt.Model)
		if i == cur {
			p.pub = exactFit{ok: true, seen: p.ladder.Seen(), index: i, lambda: p.ladder.Lambda(i), opt: opt}
		}
	}
}

// optimum returns the exact fit of member i on the current window (for the
// gram learner with its KKT residual measured on the records). The
// last fit is reused while no record arrived and λ did not move, and also,
// unless fresh, for MinPublish after it was made: Publish builds a
// candidate on every call once MinPublish has passed (the daemon calls it
// every 100 ms), and most candidates are not published, so without this
// the daemon would fit up to ten times a second.
func (p *Pipeline) optimum(i int, now time.Time, fresh bool) online.Optimum {
	f := &p.pub
	if f.ok && f.index == i && f.lambda == p.ladder.Lambda(i) &&
		((f.seen == p.ladder.Seen() && f.opt.Model.Records == p.ladder.Len()) ||
			(!fresh && !f.at.IsZero() && now.Sub(f.at) < p.minPublish && now.Sub(f.at) >= 0)) {
		return f.opt
	}
	opt := p.ladder.Optimum(i, nil, &p.exact)
	if p.ladder.Learner() == config.LearnerGram {
		// The gram fit comes from the window's sums; the KKT residual the
		// document carries is measured on the records (one pass).
		opt.KKT = max(opt.KKT, p.ladder.ModelKKT(&opt.Model))
		opt.Converged = opt.KKT <= p.exact.Tol
	}
	*f = exactFit{ok: true, seen: p.ladder.Seen(), index: i, lambda: p.ladder.Lambda(i), at: now, opt: opt}
	return f.opt
}

// shiftScores re-indexes the chooser and the last scores after the grid
// moved by k members (member i is now the old member i+k): a score keeps
// its member, and a member that has not been scored yet has NaN metrics
// until the next retune.
func (p *Pipeline) shiftScores(k int) {
	n := p.ladder.Size()
	p.chooser.Shift(-k, n)
	old := slices.Clone(p.scores)
	for i := range p.scores {
		j := i + k
		if j >= 0 && j < len(old) {
			p.scores[i] = old[j]
		} else {
			nan := math.NaN()
			p.scores[i] = online.Score{Loss: nan, SE: nan, AUC: nan, Brier: nan, LogLoss: nan, RMSE: nan, MAE: nan, R2: nan}
		}
		p.scores[i].Index, p.scores[i].Lambda, p.scores[i].Nonzero = i, p.ladder.Lambda(i), p.ladder.Nonzero(i)
	}
}

// choose lets the chooser pick λ* from the last scores. After a drift
// adaptation, until the train window has filled again (the drift watch's
// "filled": window.records train records, or n_s with a time span or the
// decay learner), each pick that the scores give is adopted without the
// hysteresis.
func (p *Pipeline) choose() (int, bool) {
	if p.adopt && p.ladder.Len() >= p.watch.fillAt {
		p.adopt = false
	}
	if !p.adopt {
		return p.chooser.Update(p.scores)
	}
	kept, prev := p.chooser, p.chooser.Current()
	p.chooser.Reset()
	idx, _ := p.chooser.Update(p.scores)
	if idx < 0 {
		p.chooser = kept
		return prev, false
	}
	return idx, idx != prev
}

// gridStep returns the ladder's step in ln λ, ln(λ_0/λ_{K−1})/(K−1), or 0
// for a single-member ladder.
func (p *Pipeline) gridStep() float64 {
	l := p.ladder
	k := l.Size()
	if k < 2 || !(l.Lambda(k-1) > 0) {
		return 0
	}
	return math.Log(l.Lambda(0)/l.Lambda(k-1)) / float64(k-1)
}

// Idle runs steps stochastic steps per ladder member on the current window
// (spare time converges a quiet stream); it does nothing on an empty window.
func (p *Pipeline) Idle(steps int) {
	if steps > 0 && p.ladder.Len() > 0 {
		p.ladder.Idle(steps)
	}
}

// current returns the ladder index of the current model: the chooser's
// choice, 0 for a single-member (fixed λ) ladder, or −1 before the first
// retune has chosen (nothing is published until then).
func (p *Pipeline) current() int {
	if c := p.chooser.Current(); c >= 0 {
		return c
	}
	if p.ladder.Size() == 1 {
		return 0
	}
	return -1
}

// Current returns the ladder index of the current model, or −1 before the
// first retune of a ladder has chosen λ*.
func (p *Pipeline) Current() int { return p.current() }

// Snapshot is one immutable model version: its document and the model it
// describes, trimmed to the named features. Readers on other goroutines
// may share it.
type Snapshot struct {
	// Doc is the model document (HTTP, bus, key-value bucket).
	Doc *sink.ModelDoc
	// Model is the chosen ladder member, trimmed to len(Names) features.
	Model *online.Model
	// Names are the feature names in model order.
	Names []string
	// PathLambdas holds every ladder member's λ, largest first.
	PathLambdas []float64
	// Path holds every ladder member's standardized coefficients, trimmed
	// to len(Names) features (the status page's regularization path).
	Path [][]float64
}

// Publish decides whether a new version is due at now and returns it, or
// nil: a version goes out when the model changed beyond publish.tolerance
// (sink.Changed) and at least MinPublish has passed since the last, when the
// heartbeat is due, or when force is set (final publication). Nothing is
// published before λ* has been chosen (a fixed-λ model publishes from its
// first record) or before a feature has a name. rejected is the model's
// count of rejected records for the document. An error means the current
// model could not be written as a document (for example a non-finite
// value); nothing is published then.
func (p *Pipeline) Publish(now time.Time, rejected uint64, force bool) (*Snapshot, error) {
	if !force && now.Sub(p.lastPub) < p.minPublish {
		return nil, nil // a busy stream moves coefficients all the time
	}
	s, err := p.build(now, p.version+1, rejected, force)
	if s == nil || err != nil {
		return nil, err
	}
	heartbeat := p.cfg.Publish.Heartbeat.Std()
	if !force && !sink.Changed(p.last, s.Doc, p.cfg.Publish.Tolerance) && !renamed(p.last, s.Doc) &&
		(heartbeat <= 0 || now.Sub(p.lastPub) < heartbeat) {
		return nil, nil
	}
	p.version = s.Doc.Version
	p.last = s.Doc
	p.lastPub = now
	p.addPath(s)
	return s, nil
}

// Document returns the current model at now as an unpublished snapshot with
// the current version number (lariat fit, replay, tests); nil before λ* has
// been chosen or before a feature has a name.
func (p *Pipeline) Document(now time.Time, rejected uint64) (*Snapshot, error) {
	s, err := p.build(now, p.version, rejected, true)
	if s != nil {
		p.addPath(s)
	}
	return s, err
}

// build writes the current model as a snapshot of the given version;
// fresh makes the exact fit current (optimum).
func (p *Pipeline) build(now time.Time, version, rejected uint64, fresh bool) (*Snapshot, error) {
	cur := p.current()
	names := p.at.names
	if cur < 0 || p.ladder.Len() == 0 || len(names) == 0 {
		return nil, nil
	}
	opt := p.optimum(cur, now, fresh)
	m := opt.Model
	trim(&m, len(names))
	names = compact(&m, names)
	grid := p.ladder.Grid()
	var th *sink.Threshold
	if p.tuner != nil {
		th = p.tuner.threshold()
	}
	doc, err := sink.NewModelDoc(&sink.DocInput{
		Name:      p.name,
		Version:   version,
		Features:  names,
		Model:     &m,
		Grid:      &grid,
		Scores:    p.ladderNow(),
		Holdout:   p.HeldOutLen(),
		Applied:   p.seq,
		Rejected:  rejected,
		Threshold: th,
		Updated:   now,
		KKT:       opt.KKT,
		KKTTol:    p.exact.Tol,
	})
	if err != nil {
		return nil, err
	}
	return &Snapshot{Doc: doc, Model: &m, Names: names}, nil
}

// addPath fills the snapshot's regularization path (every member's λ and
// standardized coefficients), only for a snapshot that goes out: Publish
// builds a candidate on every call and most are not published.
func (p *Pipeline) addPath(s *Snapshot) {
	k := p.ladder.Size()
	s.PathLambdas, s.Path = make([]float64, k), make([][]float64, k)
	for i := range k {
		mi := p.ladder.Model(i)
		trim(&mi, len(p.at.names))
		compact(&mi, p.at.names)
		s.PathLambdas[i], s.Path[i] = mi.Lambda, mi.Standardized
	}
}

// Names returns the feature names as of the last record (shared,
// read-only); a restored pipeline returns the names it was saved with.
func (p *Pipeline) Names() []string { return p.at.names }

// SetPosition records seq as the last sequence of the model's stream that
// has been applied or rejected: a restored pipeline continues after it.
func (p *Pipeline) SetPosition(seq uint64) { p.position = seq }

// Position returns the last stream sequence applied or rejected (0 before
// any, and always with core NATS intake).
func (p *Pipeline) Position() uint64 { return p.position }

// RaiseVersion makes the next version at least v+1 (versions stay monotone
// across restarts: v is the last version found in the key-value bucket).
func (p *Pipeline) RaiseVersion(v uint64) { p.version = max(p.version, v) }

// Version returns the last published version (0 before the first).
func (p *Pipeline) Version() uint64 { return p.version }

// ladderNow returns the last retune's scores with each member's current λ:
// the ladder re-anchors as the window moves, so the λ grid of the document
// must be the one the published model belongs to, while the held-out
// metrics and support sizes are those of the exact fits of the last
// retune.
func (p *Pipeline) ladderNow() []online.Score {
	if len(p.scores) == 0 {
		return nil
	}
	out := slices.Clone(p.scores)
	for i := range out {
		if j := out[i].Index; j >= 0 && j < p.ladder.Size() {
			out[i].Lambda = p.ladder.Lambda(j)
		}
	}
	return out
}

// trim cuts a model to its first n features (the names learned so far; the
// columns past them have never seen a value and have coefficient 0).
func trim(m *online.Model, n int) {
	if n >= len(m.Coef) {
		return
	}
	m.Coef = m.Coef[:n]
	m.Standardized = m.Standardized[:n]
	m.Mean = m.Mean[:n]
	m.Std = m.Std[:n]
}

// SetThreshold changes a logistic model's threshold mode and target and
// re-tunes at once; the next document shows it. It returns an error
// wrapping ErrThreshold for an invalid mode or target, or for a model that
// is not logistic.
func (p *Pipeline) SetThreshold(mode string, target float64) error {
	if p.tuner == nil {
		return fmt.Errorf("%w: model %s is not logistic and has no threshold", ErrThreshold, p.name)
	}
	if err := CheckThreshold(mode, target); err != nil {
		return err
	}
	p.tuner.set(mode, target, p, p.current())
	return nil
}

// ROC returns the chosen member's ROC table on the held-out ring from the
// last threshold tuning (nil before one, and for a squared-loss model).
func (p *Pipeline) ROC() []online.ROCPoint {
	if p.tuner == nil {
		return nil
	}
	return p.tuner.roc
}

// DriftCounts counts what the drift watch detected since the pipeline was
// built, whether or not the cooldown let the alert out.
type DriftCounts struct {
	// Performance, Data and Model count the detections of each kind.
	Performance, Data, Model KindCounts
	// Adaptations counts the drift adaptations (train window shrunk).
	Adaptations int
}

// KindCounts counts the detections of one alert kind.
type KindCounts struct {
	// Detected counts every detection.
	Detected int
	// Suppressed counts the detections the cooldown held back.
	Suppressed int
}

// DriftCounts returns the drift watch's counts.
func (p *Pipeline) DriftCounts() DriftCounts {
	st := &p.watch.stats
	kc := func(i int) KindCounts { return KindCounts{Detected: st.detected[i], Suppressed: st.suppressed[i]} }
	return DriftCounts{Performance: kc(0), Data: kc(1), Model: kc(2), Adaptations: st.adaptations}
}

// Logistic reports whether the model has a threshold (a logistic loss).
func (p *Pipeline) Logistic() bool { return p.tuner != nil }

// Counts returns the records applied (train and held out) and, of those,
// held out.
func (p *Pipeline) Counts() (applied, heldOut uint64) { return p.seq, p.held }

// Ladder returns the pipeline's ladder for reading (tools and tests); it
// belongs to the pipeline's goroutine like the pipeline itself.
func (p *Pipeline) Ladder() *online.Ladder { return p.ladder }

// Holdout returns the held-out ring for reading (nil when the holdout is
// off); it belongs to the pipeline's goroutine like the pipeline itself.
func (p *Pipeline) Holdout() *online.Holdout { return p.hold }

// Scores returns the last retune's held-out scores (shared, read-only).
func (p *Pipeline) Scores() []online.Score { return p.scores }

// HeldOutLen returns the number of records in the held-out ring.
func (p *Pipeline) HeldOutLen() int {
	if p.hold == nil {
		return 0
	}
	return p.hold.Len()
}

// HeldOutScores implements heldOutScorer for the threshold tuner.
func (p *Pipeline) HeldOutScores(member int, probs, labels []float64) ([]float64, []float64) {
	if p.hold == nil || p.hold.Len() == 0 {
		return probs[:0], labels[:0]
	}
	m := p.fitted(member)
	if len(m.Standardized) != p.hold.Features() {
		return p.ladder.HoldoutPredictions(member, p.hold, probs), p.hold.Labels(labels)
	}
	return p.ladder.ModelPredictions(&m, p.hold, probs), p.hold.Labels(labels)
}

var _ heldOutScorer = (*Pipeline)(nil)

// trainWindow is the drift watch's view of the pipeline (watchedWindow).
type trainWindow struct{ p *Pipeline }

var _ watchedWindow = trainWindow{}

func (t trainWindow) TrainLen() int   { return t.p.ladder.Len() }
func (t trainWindow) HeldOutLen() int { return t.p.HeldOutLen() }

func (t trainWindow) HoldoutPeriod() int {
	if t.p.hold == nil {
		return 0
	}
	return t.p.split.Period()
}

func (t trainWindow) KeepNewestTrain(n int)   { t.p.ladder.Shrink(n) }
func (t trainWindow) KeepNewestHeldOut(n int) { t.p.hold.KeepNewest(n) }
