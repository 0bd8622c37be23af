package fit

// This file resolves the options, fits and writes the model; reading and
// checking the CSV file is in csv.go.

import (
	"bytes"
	"cmp"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
	"lariat/window"
)

// Fit defaults.
const (
	// DefaultTol is the KKT tolerance Run converges to when
	// Options.Tol is 0: the largest violation of the optimality
	// conditions, on the standardized scale, in units of the loss's
	// derivative (label units for the squared loss).
	DefaultTol = 1e-9
	// DefaultEpochs is the epoch budget of Run when Options.MaxEpochs
	// is 0; an epoch is one pass's worth of steps per ladder member.
	DefaultEpochs = 20000
	// DefaultMix is the elastic-net mix α when Options.Mix is 0.
	DefaultMix = 0.5
)

// Options configures Run. Only Input and Label are required.
type Options struct {
	// Input is the CSV file: one header row of column names, then one
	// record per row.
	Input string
	// Label is the name of the label column. Every other column with a
	// number in it is a feature; a column with no number at all (an ID, a
	// timestamp) is skipped and reported.
	Label string
	// Loss is "squared" (default) or "logistic" (labels 0/1 or true/false).
	Loss string
	// Penalty is "lasso" (default), "ridge" or "elastic-net".
	Penalty string
	// Mix is the elastic-net mix α in (0, 1); nil means DefaultMix. It
	// must be nil for lasso and ridge.
	Mix *float64
	// Lambda is the λ to fit. nil chooses λ on held-out rows: every 5th row
	// is held out, a ladder of 12 λ is fitted on the others (from λ_max
	// down to 10⁻³λ_max for lasso and elastic net; for ridge between the λ
	// where its effective degrees of freedom are 0.5 and rank − 0.5), moved
	// down while the lowest held-out loss sits at its smallest λ
	// (online.Ladder.Extend), the one-standard-error rule (or Rule) picks
	// λ, and the model is refitted with it on every row. A value > 0 fits
	// that λ; 0 fits the unpenalized model (least squares, or logistic
	// regression by maximum likelihood), and is an error where that model
	// is not unique: more features than rows, collinear features, or, for
	// the logistic loss, classes that the features separate.
	Lambda *float64
	// Rule is the selection rule when Lambda is nil: "one-se" (default) or
	// "min".
	Rule string
	// JSON writes the model as one JSON document instead of a table.
	JSON bool
	// Ladder also writes the selection ladder (λ, support size and
	// held-out loss of every member). It needs Lambda == nil.
	Ladder bool
	// Tol is the KKT tolerance; 0 means DefaultTol.
	Tol float64
	// MaxEpochs bounds the work; 0 means DefaultEpochs.
	MaxEpochs int
	// Seed seeds the learner (0: a fixed seed derived from the name "fit");
	// the same file and options give the same bits.
	Seed uint64
}

// Error is a problem with Run's input or options. Its message is one line:
// "fit: FILE:LINE: column "x": what is wrong", with the parts that do not
// apply left out.
type Error struct {
	File   string // input file, if the error is about it
	Line   int    // 1-based line in the file (the header is line 1); 0 if none
	Column string // column name; "" if none
	Msg    string // what is wrong, in words
}

// Error returns the one-line message.
func (e *Error) Error() string { return record.Located("fit", e.File, e.Line, e.Column, e.Msg) }

func optionError(format string, args ...any) error {
	return &Error{Msg: fmt.Sprintf(format, args...)}
}

// fitSpec is Options checked and resolved.
type fitSpec struct {
	loss      online.Loss
	penalty   online.Penalty
	rule      online.Rule
	tol       float64
	maxEpochs int
}

func (o *Options) resolve() (fitSpec, error) {
	s := fitSpec{tol: o.Tol, maxEpochs: o.MaxEpochs}
	if o.Input == "" {
		return s, optionError("no input file (--input)")
	}
	if o.Label == "" {
		return s, optionError("no label column (--label)")
	}
	name := orDefault(o.Loss, "squared")
	var ok bool
	if s.loss, ok = online.LossByName(name); !ok {
		return s, optionError("unknown loss %q (allowed: squared, logistic)", o.Loss)
	}
	var err error
	if s.penalty, err = o.resolvePenalty(); err != nil {
		return s, err
	}
	if v := o.Lambda; v != nil && (!(*v >= 0) || math.IsInf(*v, 1)) {
		return s, optionError("lambda %v must be a finite number >= 0 (0 = unpenalized; leave it out to choose λ on held-out rows)", *v)
	}
	if o.Ladder && o.Lambda != nil {
		return s, optionError("--ladder shows how λ is chosen; it cannot be combined with --lambda")
	}
	if s.rule, err = online.ParseRule(orDefault(o.Rule, "one-se")); err != nil {
		return s, optionError("unknown rule %q (allowed: one-se, min)", o.Rule)
	}
	if !(s.tol >= 0) || math.IsInf(s.tol, 1) {
		return s, optionError("tolerance %v must be a finite number >= 0", o.Tol)
	}
	if s.tol == 0 {
		s.tol = DefaultTol
	}
	if s.maxEpochs <= 0 {
		s.maxEpochs = DefaultEpochs
	}
	return s, nil
}

func (o *Options) resolvePenalty() (online.Penalty, error) {
	switch kind := orDefault(o.Penalty, "lasso"); kind {
	case "lasso", "ridge":
		if o.Mix != nil {
			return online.Penalty{}, optionError("--mix applies only to elastic-net, not %s", kind)
		}
		if kind == "lasso" {
			return online.Lasso(), nil
		}
		return online.Ridge(), nil
	case "elastic-net":
		mix := DefaultMix
		if o.Mix != nil {
			mix = *o.Mix
		}
		if !(mix > 0 && mix < 1) {
			return online.Penalty{}, optionError("elastic-net mix %v must be in (0, 1) (mix 0 is ridge, 1 lasso)", mix)
		}
		return online.ElasticNet(mix), nil
	}
	return online.Penalty{}, optionError("unknown penalty %q (allowed: lasso, ridge, elastic-net)", o.Penalty)
}

func orDefault(s, def string) string {
	if s == "" {
		return def
	}
	return s
}

// fitDoc is Run's JSON document. Its field names follow the model document
// the daemon publishes (sink.ModelDoc) where the two overlap.
type fitDoc struct {
	Input        string                `json:"input"`
	Label        string                `json:"label"`
	Loss         string                `json:"loss"`
	Penalty      sink.PenaltySpec      `json:"penalty"`
	LambdaMax    float64               `json:"lambda_max"`
	Intercept    float64               `json:"intercept"`
	Coefficients map[string]float64    `json:"coefficients"`
	StdIntercept float64               `json:"standardized_intercept"`
	Standardized map[string]float64    `json:"standardized"`
	Features     []string              `json:"features"`
	Skipped      []string              `json:"skipped,omitempty"`
	Scale        map[string]sink.Scale `json:"scale"`
	Records      int                   `json:"records"`
	Nonzero      int                   `json:"nonzero"`
	KKT          float64               `json:"kkt"`
	Tol          float64               `json:"kkt_tol"`
	Converged    bool                  `json:"converged"`
	Unpenalized  bool                  `json:"unpenalized,omitempty"`
	Selection    *fitSelection         `json:"selection,omitempty"`
	Ladder       []fitRung             `json:"ladder,omitempty"`

	order []int // feature indexes by decreasing |θ|, for the table
	model online.Model
}

// fitSelection says how λ was chosen when it was not given.
type fitSelection struct {
	Rule      string  `json:"rule"`  // "one-se", "min", or "fraction" (too few rows to hold any out)
	Every     int     `json:"every"` // one row in Every held out
	Train     int     `json:"train"`
	Holdout   int     `json:"holdout"`
	Index     int     `json:"index"`      // chosen ladder member
	Loss      float64 `json:"loss"`       // its mean held-out loss
	SE        float64 `json:"se"`         // and the standard error
	Lambda    float64 `json:"lambda"`     // λ of the chosen member
	LambdaMax float64 `json:"lambda_max"` // of the training rows
	// AtEnd is set when the smallest λ of the ladder was chosen after the
	// ladder was extended as far as it goes: the held-out loss may still
	// fall below it (give Lambda to go lower).
	AtEnd bool `json:"at_end,omitempty"`
	// Grid says how the ladder's λ grid was anchored and how far it was
	// extended below its anchored bottom.
	Grid *sink.GridSpec `json:"grid"`
}

// fitRung is one member of the selection ladder.
type fitRung struct {
	Index   int     `json:"index"`
	Lambda  float64 `json:"lambda"`
	Nonzero int     `json:"nonzero"`
	Loss    float64 `json:"loss"`
	SE      float64 `json:"se"`
	KKT     float64 `json:"kkt"`
	Chosen  bool    `json:"chosen,omitempty"`
}

// Run reads the CSV file o.Input, fits one penalized model with the learner
// the daemon runs on streams (pipeline.Pipeline), the whole file being the
// window, until every KKT violation is at most the tolerance (or the epoch
// budget runs out, reported as "converged": false), and writes the model to
// w as a table or, with o.JSON, as JSON. Bad input or options give a
// *Error and write nothing.
func Run(w io.Writer, o Options) error {
	s, err := o.resolve()
	if err != nil {
		return err
	}
	t, err := readTable(o.Input, o.Label, s.loss.Name() == "logistic")
	if err != nil {
		return err
	}
	doc := &fitDoc{Input: o.Input, Label: o.Label, Skipped: t.skipped}
	var lambda float64
	if o.Lambda != nil {
		lambda = *o.Lambda
	} else if lambda, err = s.choose(t, o, doc); err != nil {
		return err
	}
	if lambda == 0 {
		err = s.fitUnpenalized(t, o.Seed, doc)
	} else {
		err = s.fitOne(t, lambda, o.Seed, doc)
	}
	if err != nil {
		return err
	}
	if o.JSON {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(doc)
	}
	return writeFitTable(w, doc)
}

// pipeline returns the pipeline lariat fit drives: the daemon's per-model
// pipeline on the table's columns, with a window of window rows, λ fixed
// (lambda > 0) or a ladder, every every-th row held out into a ring of
// hold rows (every = 0: none), no drift watch and no retune but the one
// fit asks for.
func (s *fitSpec) pipeline(t *table, window int, lambda float64, every, hold int, seed uint64) (*pipeline.Pipeline, error) {
	return s.pipelineFor(t, window, lambda, every, hold, seed, false)
}

// pipelineFor is pipeline, or with unpenalized the pipeline of the λ = 0
// fit.
func (s *fitSpec) pipelineFor(t *table, window int, lambda float64, every, hold int, seed uint64, unpenalized bool) (*pipeline.Pipeline, error) {
	m := config.DefaultModel()
	m.Name, m.Loss, m.Lambda = "fit", s.loss.Name(), lambda
	m.Penalty, m.Mix = config.PenaltyElasticNet, s.penalty.Mix
	m.Features, m.MaxFeatures = t.names, len(t.names)
	m.Window.Records = window
	m.Holdout = config.Holdout{Every: every, Records: hold}
	m.Retune.Every = math.MaxInt32
	m.Retune.Rule = s.rule.String()
	m.Drift.Performance = config.DriftOff
	p, err := pipeline.New(pipeline.Options{Model: &m, Seed: seed, Unpenalized: unpenalized})
	if err != nil {
		return nil, &Error{Msg: err.Error()}
	}
	return p, nil
}

// feed applies every row to p, in file order.
func (s *fitSpec) feed(t *table, p *pipeline.Pipeline) error {
	var rec record.Record
	for i := range t.rows() {
		rec.X, rec.Y, rec.W = t.row(i), t.y[i], 1
		if _, err := p.Apply(&rec, t.names, time.Time{}); err != nil {
			return &Error{Msg: fmt.Sprintf("line %d: %v", t.lines[i], err)}
		}
	}
	return nil
}

// fitOne fits λ on every row and fills the model part of doc.
func (s *fitSpec) fitOne(t *table, lambda float64, seed uint64, doc *fitDoc) error {
	p, err := s.pipeline(t, t.rows(), lambda, 0, 0, seed)
	if err != nil {
		return err
	}
	if err := s.feed(t, p); err != nil {
		return err
	}
	l := p.Ladder()
	doc.Converged = p.Converge(s.tol, s.maxEpochs)
	doc.KKT, doc.Tol = l.KKT(0), s.tol
	doc.LambdaMax = l.LambdaMax()
	doc.fill(l.Model(0), t.names)
	return nil
}

func (d *fitDoc) fill(m online.Model, names []string) {
	d.model = m
	d.Loss = m.Loss
	d.Penalty = sink.PenaltySpec{Kind: m.Penalty.Kind(), Mix: m.Penalty.Mix, Lambda: m.Lambda}
	d.Intercept, d.StdIntercept = m.Intercept, m.StdIntercept
	d.Features = names
	d.Records = m.Records
	d.Coefficients = map[string]float64{}
	d.Standardized = map[string]float64{}
	d.Scale = make(map[string]sink.Scale, len(names))
	for j, name := range names {
		d.Scale[name] = sink.Scale{Mean: m.Mean[j], Std: m.Std[j]}
		if m.Standardized[j] != 0 {
			d.Coefficients[name] = m.Coef[j]
			d.Standardized[name] = m.Standardized[j]
			d.order = append(d.order, j)
		}
	}
	d.Nonzero = len(d.order)
	slices.SortStableFunc(d.order, func(a, b int) int {
		return cmp.Compare(math.Abs(m.Standardized[b]), math.Abs(m.Standardized[a]))
	})
}

// choose picks λ on held-out rows (see Options.Lambda) and records the
// selection, and with o.Ladder the whole ladder, in doc.
func (s *fitSpec) choose(t *table, o Options, doc *fitDoc) (float64, error) {
	every := window.Splitter{}.Period()
	nHold := t.rows() / every
	nTrain := t.rows() - nHold
	if nHold < 2 {
		// Too few rows to hold any out: a fixed fraction of λ_max.
		return s.chooseFraction(t, o.Seed, doc)
	}
	p, err := s.pipeline(t, nTrain, 0, every, nHold, o.Seed)
	if err != nil {
		return 0, err
	}
	if err := s.feed(t, p); err != nil {
		return 0, err
	}
	// Converge and score; while the lowest held-out loss sits at the
	// smallest λ, a retune moves the grid down (online.Ladder.Extend) and
	// the ladder is converged and scored again. The pipeline's chooser
	// holds a new choice back for one retune (hysteresis), so a round that
	// did not move the grid is repeated while it still could move. Converged
	// fits make each round deterministic, and a move down is never undone
	// by the next round, so this ends within about Grid.MaxExtended/3·2
	// rounds; the bound is a guard.
	l := p.Ladder()
	for range 64 {
		p.Converge(s.tol, s.maxEpochs)
		if p.Retune().Extended != 0 {
			continue
		}
		sc, g, k := p.Scores(), l.Grid(), l.ExtendStep()
		if online.Choose(sc, online.RuleMin) != l.Size()-1 || g.Extended >= g.MaxExtended || online.Choose(sc, s.rule) < k {
			break
		}
	}
	scores := p.Scores()
	pick := online.Choose(scores, s.rule)
	if pick < 0 {
		return s.chooseFraction(t, o.Seed, doc)
	}
	c := scores[pick]
	if !(c.Lambda > 0) {
		return 0, &Error{File: doc.Input, Msg: "cannot choose λ: the label does not vary; give --lambda"}
	}
	doc.Selection = &fitSelection{Rule: s.rule.String(), Every: every, Train: l.Len(), Holdout: p.HeldOutLen(),
		Index: c.Index, Loss: c.Loss, SE: c.SE, Lambda: c.Lambda, LambdaMax: l.LambdaMax(),
		Grid: sink.NewGridSpec(l.Grid())}
	g := l.Grid()
	doc.Selection.AtEnd = c.Index == l.Size()-1 && g.Extended >= g.MaxExtended
	if o.Ladder {
		for i, sc := range scores {
			doc.Ladder = append(doc.Ladder, fitRung{Index: sc.Index, Lambda: sc.Lambda, Nonzero: sc.Nonzero,
				Loss: sc.Loss, SE: sc.SE, KKT: l.KKT(sc.Index), Chosen: i == pick})
		}
	}
	return c.Lambda, nil
}

// fitFraction is the λ fraction of λ_max used when no row can be held out.
const fitFraction = 0.01

func (s *fitSpec) chooseFraction(t *table, seed uint64, doc *fitDoc) (float64, error) {
	p, err := s.pipeline(t, t.rows(), 0, 0, 0, seed)
	if err != nil {
		return 0, err
	}
	if err := s.feed(t, p); err != nil {
		return 0, err
	}
	l := p.Ladder()
	lambda := fitFraction * l.LambdaMax()
	doc.Selection = &fitSelection{Rule: "fraction", Train: t.rows(), Index: -1, Lambda: lambda, LambdaMax: l.LambdaMax()}
	if !(lambda > 0) {
		return 0, &Error{File: doc.Input, Msg: "cannot choose λ: the label does not vary; give --lambda"}
	}
	return lambda, nil
}

// describeGrid says in words how the ladder's grid was placed.
func describeGrid(g *sink.GridSpec) string {
	var b strings.Builder
	switch g.Anchor {
	case online.AnchorDF:
		fmt.Fprintf(&b, "ridge degrees of freedom %g to %g (rank %d): λ %.6g to %.6g", g.DF[0], g.DF[1], g.Rank, float64(g.Top), float64(g.Bottom))
	default:
		fmt.Fprintf(&b, "λ_max to %.6g", float64(g.Bottom))
	}
	if g.Extended > 0 {
		fmt.Fprintf(&b, ", extended %d steps down (at most %d)", g.Extended, g.MaxExtended)
	}
	return b.String()
}

// writeFitTable writes doc as aligned text: a header block, the nonzero
// coefficients by decreasing |standardized|, and with --ladder the path.
func writeFitTable(w io.Writer, d *fitDoc) error {
	var buf bytes.Buffer
	tw := tabwriter.NewWriter(&buf, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "input\t%s (%d records, %d features, label %s)\n", d.Input, d.Records, len(d.Features), d.Label)
	if len(d.Skipped) > 0 {
		fmt.Fprintf(tw, "skipped\t%s (no numbers)\n", strings.Join(d.Skipped, ", "))
	}
	if d.Unpenalized {
		fmt.Fprintf(tw, "model\t%s loss, unpenalized (λ = 0)\n", d.Loss)
	} else {
		fmt.Fprintf(tw, "model\t%s loss, %s (α = %g), λ = %.6g, λ_max = %.6g\n", d.Loss, d.Penalty.Kind, d.Penalty.Mix, d.Penalty.Lambda, d.LambdaMax)
	}
	if sel := d.Selection; sel != nil {
		if sel.Rule == "fraction" {
			fmt.Fprintf(tw, "λ chosen\t%g·λ_max (too few rows to hold any out)\n", fitFraction)
		} else {
			fmt.Fprintf(tw, "λ chosen\trule %s on %d held-out rows (1 in %d): loss %.6g ± %.2g, member %d\n",
				sel.Rule, sel.Holdout, sel.Every, sel.Loss, sel.SE, sel.Index)
			if sel.AtEnd {
				fmt.Fprintf(tw, "\tthe smallest λ of the ladder: a smaller one may do better (try --lambda)\n")
			}
		}
	}
	if d.Converged {
		fmt.Fprintf(tw, "KKT\t≤ %.2g (converged)\n", d.Tol)
	} else {
		fmt.Fprintf(tw, "KKT\t%.2g > %.2g (NOT converged: raise --max-epochs)\n", d.KKT, d.Tol)
	}
	fmt.Fprintf(tw, "nonzero\t%d of %d\n\n", d.Nonzero, len(d.Features))
	fmt.Fprintln(tw, "feature\tcoefficient\tstandardized\tmean\tstd")
	fmt.Fprintf(tw, "(intercept)\t%.6g\t%.6g\t\t\n", d.Intercept, d.StdIntercept)
	m := d.model
	for _, j := range d.order {
		fmt.Fprintf(tw, "%s\t%.6g\t%.6g\t%.6g\t%.6g\n", d.Features[j], m.Coef[j], m.Standardized[j], m.Mean[j], m.Std[j])
	}
	if len(d.Ladder) > 0 {
		fmt.Fprintf(tw, "\nladder on %d training rows, λ_max = %.6g\n", d.Selection.Train, d.Selection.LambdaMax)
		if g := d.Selection.Grid; g != nil {
			fmt.Fprintf(tw, "grid\t%s\n", describeGrid(g))
		}
		fmt.Fprintln(tw, "index\tlambda\tnonzero\theld-out loss\tse\tkkt")
		for _, r := range d.Ladder {
			mark := ""
			if r.Chosen {
				mark = "  <- " + d.Selection.Rule
			}
			fmt.Fprintf(tw, "%d\t%.6g\t%d\t%.6g\t%.2g\t%.2g%s\n", r.Index, r.Lambda, r.Nonzero, r.Loss, r.SE, r.KKT, mark)
		}
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	// Empty trailing cells leave trailing blanks; drop them.
	var out bytes.Buffer
	for line := range bytes.Lines(buf.Bytes()) {
		out.Write(bytes.TrimRight(line, " \n"))
		out.WriteByte('\n')
	}
	_, err := w.Write(out.Bytes())
	return err
}
