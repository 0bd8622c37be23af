package sink

import (
	"cmp"
	"encoding/json"
	"fmt"
	"slices"
	"strings"
	"sync"
	"sync/atomic"

	"lariat/online"
	"lariat/window"
)

// AlertsKept is the number of recent drift alerts (performance, data,
// model) the Store keeps per model.
const AlertsKept = 100

// PredictionAlertsKept is the number of recent prediction alerts the Store
// keeps per model, in a ring of their own so that a flood of them cannot
// evict drift alerts.
const PredictionAlertsKept = 20

// LossHistoryKept is the number of published versions whose held-out loss
// the Store keeps per model (the status page's sparkline).
const LossHistoryKept = 120

// Store holds the latest published view of every model for the HTTP API:
// the ModelDoc (with its JSON encoded once), the ROC table of a logistic
// model, the regularization path, the held-out loss of recent versions and
// the most recent alerts (drift and prediction alerts kept apart). Writers (the model goroutines) replace
// whole values; readers get immutable snapshots and never hold a lock while
// encoding a response.
type Store struct {
	mu     sync.RWMutex
	models map[string]*entry
}

// entry is one model's slot. doc, roc and path are swapped atomically; the
// alert rings and the loss history are guarded by their own mutexes.
type entry struct {
	doc     atomic.Pointer[storedDoc]
	roc     atomic.Pointer[[]ROCRow]
	path    atomic.Pointer[Path]
	problem atomic.Pointer[string] // why the model cannot publish now; nil when it can

	alertMu     sync.Mutex
	drift       *window.Ring[keptAlert] // performance, data, model
	predictions *window.Ring[keptAlert]
	added       uint64 // alerts ever added (insertion order)
	predicted   uint64 // prediction alerts ever added

	histMu  sync.Mutex
	history *window.Ring[LossPoint]
}

// keptAlert is an alert with its insertion number, which merges the two
// rings back into the order the alerts were added.
type keptAlert struct {
	n uint64
	a Alert
}

// Path is a model's regularization path at its latest publication: the
// standardized coefficients of every ladder member, largest λ first.
type Path struct {
	// Lambdas holds each member's λ.
	Lambdas []float64
	// Coef holds each member's standardized coefficients in feature order.
	Coef [][]float64
}

// LossPoint is the held-out loss of one published version.
type LossPoint struct {
	// Version is the published version.
	Version uint64
	// Loss is the chosen member's held-out loss.
	Loss float64
}

// storedDoc is a published document with its JSON encoding (newline
// terminated, as served over HTTP).
type storedDoc struct {
	doc  *ModelDoc
	json []byte
}

// ROCRow is one row of a logistic model's ROC table on the held-out ring:
// alarming at probability ≥ Threshold gives these rates.
type ROCRow struct {
	// Threshold is the probability threshold.
	Threshold float64 `json:"threshold"`
	// TPR is the true-positive rate.
	TPR float64 `json:"tpr"`
	// FPR is the false-positive rate.
	FPR float64 `json:"fpr"`
	// Precision is the fraction of alarms that are positives.
	Precision float64 `json:"precision"`
}

// NewStore returns an empty Store.
func NewStore() *Store { return &Store{models: make(map[string]*entry)} }

// Register makes names known, so the API answers 503 ("no version yet")
// instead of 404 for a configured model that has not published yet.
func (s *Store) Register(names ...string) {
	for _, n := range names {
		s.entry(n)
	}
}

// entry returns the slot of name, creating it.
func (s *Store) entry(name string) *entry {
	s.mu.RLock()
	e := s.models[name]
	s.mu.RUnlock()
	if e != nil {
		return e
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if e = s.models[name]; e == nil {
		e = &entry{
			drift:       window.NewRing[keptAlert](AlertsKept),
			predictions: window.NewRing[keptAlert](PredictionAlertsKept),
			history:     window.NewRing[LossPoint](LossHistoryKept),
		}
		s.models[name] = e
	}
	return e
}

// lookup returns the slot of name or nil.
func (s *Store) lookup(name string) *entry {
	s.mu.RLock()
	defer s.mu.RUnlock()
	return s.models[name]
}

// SetModel makes doc the latest version of doc.Model, registering the model.
// It encodes the JSON once (an error means doc cannot be served and the
// previous version stays). doc must not be modified afterwards. A finite
// held-out loss joins the model's loss history (the last LossHistoryKept
// versions).
func (s *Store) SetModel(doc *ModelDoc) error {
	b, err := json.Marshal(doc)
	if err != nil {
		return fmt.Errorf("sink: encoding model %s: %w", doc.Model, err)
	}
	e := s.entry(doc.Model)
	e.doc.Store(&storedDoc{doc: doc, json: append(b, '\n')})
	if l := float64(doc.Holdout.Loss); doc.Holdout.Records > 0 && finite(l) {
		e.histMu.Lock()
		e.history.Push(LossPoint{Version: doc.Version, Loss: l})
		e.histMu.Unlock()
	}
	return nil
}

// SetProblem records why model name cannot publish a new version now (the
// status page shows it beside the last version that went out); "" clears
// it.
func (s *Store) SetProblem(name, problem string) {
	e := s.entry(name)
	if problem == "" {
		e.problem.Store(nil)
		return
	}
	e.problem.Store(&problem)
}

// Problem returns what SetProblem recorded for name, or "".
func (s *Store) Problem(name string) string {
	if e := s.lookup(name); e != nil {
		if p := e.problem.Load(); p != nil {
			return *p
		}
	}
	return ""
}

// LossHistory returns the held-out loss of the model's recent versions,
// oldest first (nil for an unknown model).
func (s *Store) LossHistory(name string) []LossPoint {
	e := s.lookup(name)
	if e == nil {
		return nil
	}
	e.histMu.Lock()
	defer e.histMu.Unlock()
	out := make([]LossPoint, 0, e.history.Len())
	for _, p := range e.history.All() {
		out = append(out, p)
	}
	return out
}

// SetPath replaces the regularization path of name: lambdas[i] is ladder
// member i's λ and coefs[i] its standardized coefficients in feature order.
// It panics if the lengths differ (programmer error). The slices must not
// be modified afterwards.
func (s *Store) SetPath(name string, lambdas []float64, coefs [][]float64) {
	if len(lambdas) != len(coefs) {
		panic(fmt.Sprintf("sink: path of %d λ values and %d coefficient vectors", len(lambdas), len(coefs)))
	}
	s.entry(name).path.Store(&Path{Lambdas: lambdas, Coef: coefs})
}

// Path returns the regularization path of name, or nil if none was set.
// The value is shared and must not be modified.
func (s *Store) Path(name string) *Path {
	e := s.lookup(name)
	if e == nil {
		return nil
	}
	return e.path.Load()
}

// Model returns the latest document of name; doc is nil if the model is
// unknown or has not published yet, and known says whether it is registered.
func (s *Store) Model(name string) (doc *ModelDoc, known bool) {
	sd, known := s.stored(name)
	if sd == nil {
		return nil, known
	}
	return sd.doc, true
}

// stored returns the stored document of name.
func (s *Store) stored(name string) (*storedDoc, bool) {
	e := s.lookup(name)
	if e == nil {
		return nil, false
	}
	return e.doc.Load(), true
}

// Names returns the registered model names, sorted.
func (s *Store) Names() []string {
	s.mu.RLock()
	names := make([]string, 0, len(s.models))
	for n := range s.models {
		names = append(names, n)
	}
	s.mu.RUnlock()
	slices.Sort(names)
	return names
}

// Models returns the latest document of every model that has published,
// sorted by name.
func (s *Store) Models() []*ModelDoc {
	var docs []*ModelDoc
	for _, n := range s.Names() {
		if d, _ := s.Model(n); d != nil {
			docs = append(docs, d)
		}
	}
	return docs
}

// SetROC replaces the ROC table of a logistic model (computed on the
// held-out ring at a retune). Points with a non-finite value are dropped.
func (s *Store) SetROC(name string, roc []online.ROCPoint) {
	rows := make([]ROCRow, 0, len(roc))
	for _, p := range roc {
		if finite(p.Threshold) && finite(p.TPR) && finite(p.FPR) && finite(p.Precision) {
			rows = append(rows, ROCRow{Threshold: p.Threshold, TPR: p.TPR, FPR: p.FPR, Precision: p.Precision})
		}
	}
	s.entry(name).roc.Store(&rows)
}

// ROC returns the ROC table of name (nil if none was set). The slice is
// shared and must not be modified.
func (s *Store) ROC(name string) []ROCRow {
	e := s.lookup(name)
	if e == nil {
		return nil
	}
	if p := e.roc.Load(); p != nil {
		return *p
	}
	return nil
}

// AddAlert appends a to its model's ring of recent alerts of its class:
// prediction alerts evict the oldest beyond PredictionAlertsKept, the
// other (drift) kinds the oldest beyond AlertsKept.
func (s *Store) AddAlert(a Alert) {
	e := s.entry(a.Model)
	e.alertMu.Lock()
	defer e.alertMu.Unlock()
	e.added++
	if a.Kind == KindPrediction {
		e.predicted++
		e.predictions.Push(keptAlert{n: e.added, a: a})
		return
	}
	e.drift.Push(keptAlert{n: e.added, a: a})
}

// Alerts returns the recent alerts of name, oldest first, or of every model
// when name is "" (ordered by record time, then model, then sequence number).
func (s *Store) Alerts(name string) []Alert {
	if name != "" {
		e := s.lookup(name)
		if e == nil {
			return nil
		}
		return e.recent(nil)
	}
	var all []Alert
	for _, n := range s.Names() {
		all = s.lookup(n).recent(all)
	}
	slices.SortStableFunc(all, func(a, b Alert) int {
		if c := a.Time.Compare(b.Time); c != 0 {
			return c
		}
		if c := strings.Compare(a.Model, b.Model); c != 0 {
			return c
		}
		return cmp.Compare(a.Seq, b.Seq)
	})
	return all
}

// recent appends the entry's alerts of both rings to dst in the order they
// were added, oldest first.
func (e *entry) recent(dst []Alert) []Alert {
	e.alertMu.Lock()
	defer e.alertMu.Unlock()
	i, j := 0, 0
	nd, np := e.drift.Len(), e.predictions.Len()
	for i < nd || j < np {
		if j == np || (i < nd && e.drift.At(i).n < e.predictions.At(j).n) {
			dst = append(dst, e.drift.At(i).a)
			i++
		} else {
			dst = append(dst, e.predictions.At(j).a)
			j++
		}
	}
	return dst
}

// alertsOf returns the recent drift alerts (prediction false) or
// prediction alerts (true) of name, oldest first, with the number of
// prediction alerts ever added.
func (s *Store) alertsOf(name string, prediction bool) (list []Alert, predicted uint64) {
	e := s.lookup(name)
	if e == nil {
		return nil, 0
	}
	e.alertMu.Lock()
	defer e.alertMu.Unlock()
	r := e.drift
	if prediction {
		r = e.predictions
	}
	for _, k := range r.All() {
		list = append(list, k.a)
	}
	return list, e.predicted
}
