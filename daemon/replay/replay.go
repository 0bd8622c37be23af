package replay

// This file drives the pipeline over a recording; reading the two input
// formats is in input.go and the plots are in plot.go.

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
	"lariat/online"
	"lariat/sink"
)

// Input formats of Options.Format.
const (
	FormatJSONLines = "jsonl"
	FormatCSV       = "csv"
)

// Options configures Run. Only Model is required.
type Options struct {
	// Model is the model's configuration, validated (config.Load, or
	// config.DefaultModel with its fields set and checked). Its name seeds
	// the learner when Seed is 0, as in the daemon.
	Model *config.Model
	// Format is FormatJSONLines or FormatCSV; "" picks by the file name
	// (".csv" is CSV, anything else JSON lines).
	Format string
	// Label is the label column of a CSV file; required for CSV.
	Label string
	// Time is the time column of a CSV file (RFC 3339 or integer Unix
	// milliseconds); "" means the records carry no time.
	Time string
	// Seed seeds the learner; 0 derives it from the model's name (the
	// daemon's choice).
	Seed uint64
	// MinPublish is the least record time between two versions that are
	// not forced; default pipeline.DefaultMinPublish, the daemon's.
	MinPublish time.Duration
	// Progress, when set, is called with the number of lines read so far,
	// every ProgressEvery lines and once at the end.
	Progress func(lines int)
}

// ProgressEvery is how many lines pass between two Options.Progress calls.
const ProgressEvery = 512

// Error is a problem with the input or the options. Its message is one
// line: "replay: FILE:LINE: column "x": what is wrong", with the parts that
// do not apply left out.
type Error struct {
	File   string // input file, if the error is about it
	Line   int    // 1-based line in the file; 0 if none
	Column string // CSV column name; "" if none
	Msg    string // what is wrong, in words
}

// Error returns the one-line message.
func (e *Error) Error() string { return record.Located("replay", e.File, e.Line, e.Column, e.Msg) }

// Result is what a replay did.
type Result struct {
	// Model is the model's name; Logistic is set for the logistic loss.
	Model    string
	Logistic bool
	// Applied and Rejected count the records.
	Applied, Rejected int
	// Rejects are the rejected records (line and reason), in order.
	Rejects []Reject
	// Alerts are the drift alerts in the order they were raised.
	Alerts []Alert
	// Versions are the published model documents in order; the last is
	// the final, forced publication.
	Versions []*sink.ModelDoc
	// History has one row per retune that scored the ladder.
	History []Retune
	// Path is the regularization path at the end of the stream; nil when no
	// retune has scored the ladder.
	Path *Path
	// Final is the model at the end (the last version), nil if nothing
	// could be published (no λ* chosen yet).
	Final *sink.ModelDoc
	// Names are the feature names in model order at the end.
	Names []string

	pipe *pipeline.Pipeline
}

// Reject is a record the pipeline's decoder or learner refused, as the
// daemon counts it.
type Reject struct {
	Line   int    `json:"line"`
	Reason string `json:"reason"`
	Detail string `json:"detail"`
}

// Alert is one drift alert with the line of the record that raised it.
type Alert struct {
	Index int        `json:"index"` // 1-based line of the record in the file
	Time  time.Time  `json:"time"`  // the replay clock at that record
	Alert sink.Alert `json:"alert"`
}

// Retune is one retune of the ladder: the λ it chose and how that member
// does on the held-out ring.
type Retune struct {
	Index       int       `json:"index"` // 1-based line of the record that triggered it
	Time        time.Time `json:"time"`
	LambdaIndex int       `json:"lambda_index"` // −1 before a choice
	Lambda      float64   `json:"lambda"`
	Loss        float64   `json:"loss"`          // held-out loss of the chosen member
	AUC         float64   `json:"auc,omitempty"` // logistic models
	R2          float64   `json:"r2,omitempty"`  // squared-loss models
	// Coefficients and Standardized are the chosen member's nonzero
	// coefficients by feature name, in raw units and standardized.
	Coefficients map[string]float64 `json:"coefficients"`
	Standardized map[string]float64 `json:"standardized"`
}

// Path is the regularization path at the end of the stream: every ladder
// member's λ and coefficients and its held-out score from the last retune.
type Path struct {
	Names   []string `json:"names"`
	Members []Member `json:"members"`
	// Chosen is the current model's ladder index (with the chooser's
	// hysteresis); Min and OneSE are what each rule picks on the last
	// scores, −1 if none.
	Chosen int `json:"chosen"`
	Min    int `json:"min"`
	OneSE  int `json:"one_se"`
}

// Member is one ladder member on the path.
type Member struct {
	Index        int       `json:"index"`
	Lambda       float64   `json:"lambda"`
	Loss         float64   `json:"loss"` // held-out loss at the last retune; NaN (null in JSON) for a member not scored since the grid was extended
	SE           float64   `json:"se"`
	Coefficients []float64 `json:"coefficients"` // raw units, by Path.Names
	Standardized []float64 `json:"standardized"`
}

// MarshalJSON writes m with a loss and SE that are not finite (a member
// the last retune's grid extension added, not scored yet) as null.
func (m Member) MarshalJSON() ([]byte, error) {
	type plain Member
	num := func(v float64) *float64 {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		return &v
	}
	return json.Marshal(struct {
		plain
		Loss *float64 `json:"loss"`
		SE   *float64 `json:"se"`
	}{plain(m), num(m.Loss), num(m.SE)})
}

// Pipeline returns the pipeline at the end of the replay (tests compare its
// ladder with the daemon's). The caller must not use it concurrently.
func (r *Result) Pipeline() *pipeline.Pipeline { return r.pipe }

// Run replays the recording at path through the pipeline of o.Model and
// returns what happened. Bad options and unreadable input give an *Error;
// records the daemon would reject are counted in the Result instead.
func Run(path string, o Options) (*Result, error) {
	m := o.Model
	if m == nil {
		return nil, &Error{Msg: "no model"}
	}
	src, err := open(path, o)
	if err != nil {
		return nil, err
	}
	defer src.close()
	p, err := pipeline.New(pipeline.Options{Model: m, Seed: o.Seed, MinPublish: o.MinPublish})
	if err != nil {
		return nil, &Error{Msg: err.Error()}
	}
	r := &replayer{
		res:  &Result{Model: m.Name, Logistic: m.Logistic(), pipe: p},
		pipe: p,
		dec: record.NewDecoder(&record.DecoderOptions{
			Features:    m.Features,
			MaxFeatures: p.Width(),
			Logistic:    m.Logistic(),
			Missing:     m.Missing,
		}),
	}
	if err := r.run(src, o.Progress); err != nil {
		return nil, err
	}
	return r.res, nil
}

// replayer is the state of one Run.
type replayer struct {
	res   *Result
	pipe  *pipeline.Pipeline
	dec   *record.Decoder
	rec   record.Record
	clock int64 // Unix ms of the last record
}

func (r *replayer) run(src source, progress func(int)) error {
	lines := 0
	for {
		line, msg, err := src.next()
		if errors.Is(err, errEOF) {
			break
		}
		if err != nil {
			return err
		}
		lines = line
		r.apply(line, msg)
		if progress != nil && line%ProgressEvery == 0 {
			progress(line)
		}
	}
	if progress != nil {
		progress(lines)
	}
	r.finish()
	return nil
}

// apply decodes and applies one record, as the daemon's model goroutine
// does, then checks for a publication at the record's time.
func (r *replayer) apply(line int, msg []byte) {
	rec := &r.rec
	if err := r.dec.Decode(msg, rec); err != nil {
		r.reject(line, err)
		return
	}
	if rec.HasT {
		r.clock = rec.T
	} else {
		r.clock++ // deterministic: 1 ms after the record before
	}
	now := r.now()
	st, err := r.pipe.Apply(rec, r.dec.Names(), now)
	if err != nil {
		r.reject(line, err)
		return
	}
	r.res.Applied++
	for _, a := range st.Alerts {
		r.res.Alerts = append(r.res.Alerts, Alert{Index: line, Time: now, Alert: a})
	}
	if st.Retuned {
		r.retuned(line, now)
	}
	r.publish(false)
}

func (r *replayer) now() time.Time { return time.UnixMilli(r.clock).UTC() }

func (r *replayer) reject(line int, err error) {
	r.res.Rejected++
	rj := Reject{Line: line, Reason: "invalid", Detail: err.Error()}
	var re *record.Error
	if errors.As(err, &re) {
		rj.Reason, rj.Detail = re.Reason, re.Detail
	}
	r.res.Rejects = append(r.res.Rejects, rj)
}

func (r *replayer) publish(force bool) {
	s, err := r.pipe.Publish(r.now(), uint64(r.res.Rejected), force)
	if err != nil || s == nil { // the daemon logs and skips an unwritable model
		return
	}
	r.res.Versions = append(r.res.Versions, s.Doc)
	r.res.Final = s.Doc
}

// retuned adds the history row of the retune the record at line ran.
func (r *replayer) retuned(line int, now time.Time) {
	cur := r.pipe.Current()
	h := Retune{Index: line, Time: now, LambdaIndex: cur, Lambda: math.NaN(), Loss: math.NaN()}
	if cur >= 0 {
		l := r.pipe.Ladder()
		h.Lambda = l.Lambda(cur)
		if sc, ok := scoreOf(r.pipe.Scores(), cur); ok {
			h.Loss, h.AUC, h.R2 = sc.Loss, sc.AUC, sc.R2
		}
		h.Coefficients, h.Standardized = nonzero(l.Model(cur), r.dec.Names())
	}
	r.res.History = append(r.res.History, h)
}

// finish makes the final, forced publication and records the path.
func (r *replayer) finish() {
	r.publish(true)
	r.res.Names = append([]string(nil), r.pipe.Names()...)
	scores := r.pipe.Scores()
	if len(scores) == 0 {
		return
	}
	l := r.pipe.Ladder()
	names := r.res.Names
	path := &Path{Names: names, Chosen: r.pipe.Current(),
		Min: pick(scores, online.RuleMin), OneSE: pick(scores, online.RuleOneSE)}
	for i := range l.Size() {
		m := l.Model(i)
		mem := Member{Index: i, Lambda: l.Lambda(i), Loss: math.NaN(), SE: math.NaN(),
			Coefficients: clip(m.Coef, len(names)), Standardized: clip(m.Standardized, len(names))}
		if sc, ok := scoreOf(scores, i); ok {
			mem.Loss, mem.SE = sc.Loss, sc.SE
		}
		path.Members = append(path.Members, mem)
	}
	r.res.Path = path
}

// pick returns the ladder index rule chooses on scores, or −1.
func pick(scores []online.Score, rule online.Rule) int {
	k := online.Choose(scores, rule)
	if k < 0 {
		return -1
	}
	return scores[k].Index
}

// scoreOf returns the score of ladder member i.
func scoreOf(scores []online.Score, i int) (online.Score, bool) {
	for _, s := range scores {
		if s.Index == i {
			return s, true
		}
	}
	return online.Score{}, false
}

// nonzero returns m's nonzero coefficients by name, raw and standardized.
func nonzero(m online.Model, names []string) (raw, std map[string]float64) {
	raw, std = map[string]float64{}, map[string]float64{}
	for j, name := range names {
		if j < len(m.Standardized) && m.Standardized[j] != 0 {
			raw[name], std[name] = m.Coef[j], m.Standardized[j]
		}
	}
	return raw, std
}

// clip returns a copy of the first n values of v.
func clip(v []float64, n int) []float64 { return append([]float64(nil), v[:min(n, len(v))]...) }

// DefaultModel returns config.DefaultModel (the daemon's defaults) named
// name, with a placeholder subject, for settings given without a
// configuration file; adjust it and check it with Check.
func DefaultModel(name string) config.Model {
	m := config.DefaultModel()
	m.Name, m.Subject = name, "replay."+name
	return m
}

// Check validates m as the daemon's configuration check does and returns
// the first problem as an *Error.
func Check(m *config.Model) error {
	c := config.Default()
	c.Models = []config.Model{*m}
	if err := c.Validate(); err != nil {
		return &Error{Msg: fmt.Sprintf("settings: %v", err)}
	}
	return nil
}
