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

// AlertsKept is the number of recent alerts the Store keeps per model.
const AlertsKept = 100

// Store holds the latest published view of every model for the HTTP API:
// the ModelDoc (with its JSON encoded once), the ROC table of a logistic
// model and the most recent alerts. Writers (the model goroutines) replace
// whole values; readers get immutable snapshots and never hold a lock while
// encoding a response.
type Store struct {
	mu     sync.RWMutex
	models map[string]*entry
}

// entry is one model's slot. doc and roc are swapped atomically; the alert
// ring is guarded by its own mutex.
type entry struct {
	doc atomic.Pointer[storedDoc]
	roc atomic.Pointer[[]ROCRow]

	alertMu sync.Mutex
	alerts  *window.Ring[Alert]
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
		e = &entry{alerts: window.NewRing[Alert](AlertsKept)}
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
// previous version stays). doc must not be modified afterwards.
func (s *Store) SetModel(doc *ModelDoc) error {
	b, err := json.Marshal(doc)
	if err != nil {
		return fmt.Errorf("sink: encoding model %s: %w", doc.Model, err)
	}
	s.entry(doc.Model).doc.Store(&storedDoc{doc: doc, json: append(b, '\n')})
	return nil
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

// AddAlert appends a to its model's ring of recent alerts, evicting the
// oldest beyond AlertsKept.
func (s *Store) AddAlert(a Alert) {
	e := s.entry(a.Model)
	e.alertMu.Lock()
	e.alerts.Push(a)
	e.alertMu.Unlock()
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

// recent appends the entry's alerts to dst, oldest first.
func (e *entry) recent(dst []Alert) []Alert {
	e.alertMu.Lock()
	defer e.alertMu.Unlock()
	for _, a := range e.alerts.All() {
		dst = append(dst, a)
	}
	return dst
}
