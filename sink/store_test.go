package sink

import (
	"encoding/json"
	"errors"
	"math"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"lariat/online"
)

func TestStoreModels(t *testing.T) {
	s := NewStore()
	s.Register("b", "a")
	if doc, known := s.Model("a"); doc != nil || !known {
		t.Errorf("registered model: doc %v known %v", doc, known)
	}
	if _, known := s.Model("zz"); known {
		t.Error("unregistered model is known")
	}
	for v := uint64(1); v <= 3; v++ {
		if err := s.SetModel(testDoc(t, "c", "squared", v)); err != nil {
			t.Fatal(err)
		}
	}
	if doc, _ := s.Model("c"); doc == nil || doc.Version != 3 {
		t.Errorf("latest = %v", doc)
	}
	if got := s.Names(); !slices.Equal(got, []string{"a", "b", "c"}) {
		t.Errorf("Names = %v", got)
	}
	if got := s.Models(); len(got) != 1 || got[0].Model != "c" {
		t.Errorf("Models = %v", got)
	}
	// A document that cannot be encoded is refused and the old one stays.
	bad := testDoc(t, "c", "squared", 4)
	bad.Intercept = math.NaN()
	if err := s.SetModel(bad); err == nil {
		t.Error("SetModel accepted a NaN intercept")
	}
	if doc, _ := s.Model("c"); doc.Version != 3 {
		t.Errorf("version after refused update = %d", doc.Version)
	}
}

func TestStoreROC(t *testing.T) {
	s := NewStore()
	if s.ROC("m") != nil {
		t.Error("ROC of an unknown model")
	}
	s.SetROC("m", []online.ROCPoint{{Threshold: 0.9, Precision: 1}, {Threshold: math.NaN()}, {Threshold: 0.1, TPR: 1, FPR: 1, Precision: 0.5}})
	if got := s.ROC("m"); len(got) != 2 || got[1] != (ROCRow{Threshold: 0.1, TPR: 1, FPR: 1, Precision: 0.5}) {
		t.Errorf("ROC = %v (the NaN row must be dropped)", got)
	}
}

func TestStoreAlerts(t *testing.T) {
	s := NewStore()
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	for i := range AlertsKept + 50 {
		s.AddAlert(Alert{Model: "a", Kind: KindData, Seq: uint64(i), Time: t0.Add(time.Duration(2*i) * time.Second)})
	}
	s.AddAlert(Alert{Model: "b", Kind: KindModel, Seq: 7, Time: t0.Add(201 * time.Second)})
	got := s.Alerts("a")
	if len(got) != AlertsKept || got[0].Seq != 50 || got[len(got)-1].Seq != AlertsKept+49 {
		t.Fatalf("ring holds %d alerts, seq %d..%d", len(got), got[0].Seq, got[len(got)-1].Seq)
	}
	all := s.Alerts("")
	if len(all) != AlertsKept+1 {
		t.Fatalf("all = %d alerts", len(all))
	}
	if !slices.IsSortedFunc(all, func(a, b Alert) int { return a.Time.Compare(b.Time) }) {
		t.Error("merged alerts not in time order")
	}
	// b's alert at 201 s sits between a's alerts at 200 s and 202 s.
	if i := slices.IndexFunc(all, func(a Alert) bool { return a.Model == "b" }); all[i-1].Seq != 100 || all[i+1].Seq != 101 {
		t.Errorf("b's alert at position %d between seq %d and %d", i, all[i-1].Seq, all[i+1].Seq)
	}
	if s.Alerts("nope") != nil {
		t.Error("alerts of an unknown model")
	}
}

// TestStoreConcurrent runs writers and readers together (meaningful under
// -race).
func TestStoreConcurrent(t *testing.T) {
	s := NewStore()
	docs := []*ModelDoc{testDoc(t, "m", "logistic", 1), testDoc(t, "m", "logistic", 2)}
	var wg sync.WaitGroup
	wg.Go(func() {
		for i := range 500 {
			if err := s.SetModel(docs[i%2]); err != nil {
				t.Error(err)
				return
			}
			s.AddAlert(Alert{Model: "m", Seq: uint64(i)})
			s.SetROC("m", []online.ROCPoint{{Threshold: 0.5}})
		}
	})
	for range 2 {
		wg.Go(func() {
			for range 500 {
				if d, _ := s.Model("m"); d != nil && d.Version != 1 && d.Version != 2 {
					t.Errorf("torn read: version %d", d.Version)
				}
				_ = s.Alerts("")
				_ = s.ROC("m")
				_ = s.Models()
			}
		})
	}
	wg.Wait()
}

func TestAlertValidate(t *testing.T) {
	ok := func() *Alert {
		return &Alert{Model: "m", Kind: KindPerformance, Severity: SeverityCritical, Statistic: 0.4, Threshold: 0.1}
	}
	nan := math.NaN()
	for _, tc := range []struct {
		name   string
		change func(a *Alert)
		valid  bool
	}{
		{"valid", func(*Alert) {}, true},
		{"no model", func(a *Alert) { a.Model = "" }, false},
		{"unknown kind", func(a *Alert) { a.Kind = "drift" }, false},
		{"unknown severity", func(a *Alert) { a.Severity = "fatal" }, false},
		{"nan statistic", func(a *Alert) { a.Statistic = nan }, false},
		{"inf threshold", func(a *Alert) { a.Threshold = math.Inf(-1) }, false},
		{"nan probability", func(a *Alert) { a.Probability = &nan }, false},
		{"nan contribution", func(a *Alert) { a.Contributions = map[string]float64{"x": nan} }, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := ok()
			tc.change(a)
			e := a.Validate()
			if (e == nil) != tc.valid || (e != nil && !errors.Is(e, ErrBadAlert)) {
				t.Errorf("Validate = %v, want valid %v", e, tc.valid)
			}
		})
	}
}

func TestAlertJSON(t *testing.T) {
	a := Alert{Model: "m", Kind: KindData, Severity: SeverityWarning, Statistic: 0.31, Threshold: 0.25,
		Windows: AlertWindows{Train: 10000, Holdout: 2000, Detector: 500}, Features: []string{"amps"}, Seq: 9, Message: "PSI"}
	b, err := json.Marshal(a)
	if err != nil {
		t.Fatal(err)
	}
	const want = `{"model":"m","kind":"data","severity":"warning","statistic":0.31,"threshold":0.25,` +
		`"windows":{"train":10000,"holdout":2000,"detector":500},"features":["amps"],"seq":9,"message":"PSI"}`
	if string(b) != want {
		t.Errorf("JSON =\n%s\nwant\n%s", b, want)
	}
	a.Time = time.Date(2026, 3, 4, 5, 6, 7, 0, time.FixedZone("CET", 3600))
	b, _ = json.Marshal(a)
	if !strings.Contains(string(b), `"time":"2026-03-04T05:06:07+01:00"`) {
		t.Errorf("time not RFC 3339: %s", b)
	}
}
