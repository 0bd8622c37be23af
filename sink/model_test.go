package sink

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"math"
	"os"
	"slices"
	"testing"
	"time"

	"lariat/online"
)

func TestNewModelDoc(t *testing.T) {
	for _, tc := range []struct {
		loss      string
		threshold bool
		keys      []string // loss-specific ladder keys expected
		absent    []string
	}{
		{"squared", false, []string{"rmse", "mae", "r2"}, []string{"auc", "brier", "log_loss"}},
		{"logistic", true, []string{"auc", "brier", "log_loss"}, []string{"rmse", "mae", "r2"}},
	} {
		t.Run(tc.loss, func(t *testing.T) {
			doc := testDoc(t, "m1", tc.loss, 4)
			if got := slices.Sorted(maps.Keys(doc.Coefficients)); !slices.Equal(got, []string{"a", "c"}) {
				t.Errorf("coefficient support = %v, want [a c]", got)
			}
			// Raw coefficient of a = θ/s = 0.5/2 (README.md, "The objective").
			if doc.Coefficients["a"] != 0.25 || doc.Standardized["c"] != -1.25 {
				t.Errorf("coefficients = %v, standardized = %v", doc.Coefficients, doc.Standardized)
			}
			if len(doc.Scale) != 3 || doc.Scale["b"] != (Scale{Mean: 2, Std: 1}) {
				t.Errorf("scale = %v", doc.Scale)
			}
			if doc.Holdout.Loss != 0.7 || doc.Holdout.Records != 250 || doc.LambdaIndex != 3 {
				t.Errorf("holdout = %+v (want the score of index 3), lambda index %d", doc.Holdout, doc.LambdaIndex)
			}
			if doc.Records != (RecordCounts{Window: 1000, Holdout: 250, Seen: 5000, Applied: 6250, Rejected: 7}) {
				t.Errorf("records = %+v", doc.Records)
			}
			if (doc.Threshold != nil) != tc.threshold {
				t.Errorf("threshold = %v, want present %v", doc.Threshold, tc.threshold)
			}
			if doc.Penalty != (PenaltySpec{Kind: "lasso", Mix: 1, Lambda: 0.05}) {
				t.Errorf("penalty = %+v", doc.Penalty)
			}
			var raw struct {
				Ladder []map[string]any `json:"ladder"`
			}
			b, err := json.Marshal(doc)
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(b, &raw); err != nil {
				t.Fatal(err)
			}
			last := raw.Ladder[len(raw.Ladder)-1]
			for _, k := range tc.keys {
				if _, ok := last[k]; !ok {
					t.Errorf("ladder entry lacks %q: %v", k, last)
				}
			}
			for _, k := range tc.absent {
				if _, ok := last[k]; ok {
					t.Errorf("ladder entry of a %s model has %q", tc.loss, k)
				}
			}
		})
	}
}

func TestNewModelDocErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, tc := range []struct {
		name   string
		change func(in *DocInput)
		want   error
	}{
		{"nan coefficient", func(in *DocInput) { in.Model.Coef[0] = nan }, ErrNotFinite},
		{"inf intercept", func(in *DocInput) { in.Model.Intercept = inf }, ErrNotFinite},
		{"nan std", func(in *DocInput) { in.Model.Std[2] = nan }, ErrNotFinite},
		{"inf lambda", func(in *DocInput) { in.Model.Lambda = inf }, ErrNotFinite},
		{"nan threshold", func(in *DocInput) { in.Threshold = &Threshold{Value: nan, Mode: "fixed"} }, ErrNotFinite},
		{"duplicate name", func(in *DocInput) { in.Features[1] = "a" }, ErrFeatureNames},
		{"empty name", func(in *DocInput) { in.Features[2] = "" }, ErrFeatureNames},
	} {
		t.Run(tc.name, func(t *testing.T) {
			in := &DocInput{
				Name: "m", Features: []string{"a", "b", "c"},
				Model: testModel("logistic", []float64{1, 2, 3}, []float64{0, 0, 0}, []float64{1, 1, 1}, 0),
			}
			tc.change(in)
			if _, err := NewModelDoc(in); !errors.Is(err, tc.want) {
				t.Fatalf("err = %v, want %v", err, tc.want)
			}
		})
	}
}

func TestNewModelDocPanicsOnDimension(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Fatal("no panic for 2 names and 3 coefficients")
		}
	}()
	_, _ = NewModelDoc(&DocInput{Name: "m", Features: []string{"a", "b"},
		Model: testModel("squared", []float64{1, 2, 3}, []float64{0, 0, 0}, []float64{1, 1, 1}, 0)})
}

func TestModelDocJSON(t *testing.T) {
	doc := testDoc(t, "pump-7", "logistic", 12)
	b1, err := json.Marshal(doc)
	if err != nil {
		t.Fatal(err)
	}
	b2, _ := json.Marshal(testDoc(t, "pump-7", "logistic", 12))
	if !bytes.Equal(b1, b2) {
		t.Fatalf("encoding is not deterministic:\n%s\n%s", b1, b2)
	}
	var fields map[string]json.RawMessage
	if err := json.Unmarshal(b1, &fields); err != nil {
		t.Fatal(err)
	}
	// The fields of the model JSON that README.md names ("How λ is chosen and
	// how to read alerts": penalty, lambda_index, holdout, ladder, threshold)
	// plus the identity, coefficient and bookkeeping fields clients read.
	for _, k := range []string{"model", "version", "loss", "penalty", "lambda_index", "intercept", "coefficients",
		"standardized", "scale", "holdout", "ladder", "records", "threshold", "updated"} {
		if _, ok := fields[k]; !ok {
			t.Errorf("model JSON lacks %q", k)
		}
	}
	if got := string(fields["updated"]); got != `"2026-03-04T05:06:07Z"` {
		t.Errorf("updated = %s, want RFC 3339 UTC", got)
	}
	var back ModelDoc
	if err := json.Unmarshal(b1, &back); err != nil {
		t.Fatal(err)
	}
	b3, _ := json.Marshal(&back)
	if !bytes.Equal(b1, b3) {
		t.Errorf("round trip changed the JSON:\n%s\n%s", b1, b3)
	}
}

func TestMetricJSON(t *testing.T) {
	for _, x := range []float64{0, 1, -2.5, 1e-7, 123456789e20, 1e21, 0.1, math.SmallestNonzeroFloat64, -1e-300} {
		want, _ := json.Marshal(x)
		got, err := json.Marshal(Metric(x))
		if err != nil || !bytes.Equal(got, want) {
			t.Errorf("Metric(%v) = %s, %v; encoding/json gives %s", x, got, err, want)
		}
		var back Metric
		if err := json.Unmarshal(got, &back); err != nil || float64(back) != x {
			t.Errorf("round trip of %v = %v, %v", x, back, err)
		}
	}
	for _, x := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		got, err := json.Marshal(Metric(x))
		if err != nil || string(got) != "null" {
			t.Errorf("Metric(%v) = %s, %v; want null", x, got, err)
		}
	}
	var m Metric
	if err := json.Unmarshal([]byte("null"), &m); err != nil || !math.IsNaN(float64(m)) {
		t.Errorf("null decodes to %v, %v; want NaN", m, err)
	}
}

func TestChanged(t *testing.T) {
	base := func() *ModelDoc { return testDoc(t, "m", "logistic", 1) }
	for _, tc := range []struct {
		name   string
		change func(d *ModelDoc)
		tol    float64
		want   bool
	}{
		{"identical", func(*ModelDoc) {}, 1e-3, false},
		{"counts and time only", func(d *ModelDoc) { d.Records.Seen += 100; d.Updated = d.Updated.Add(time.Hour); d.Version++ }, 1e-3, false},
		{"small move below tol", func(d *ModelDoc) { d.Standardized["a"] += 1e-4 }, 1e-3, false},
		{"absolute move above tol", func(d *ModelDoc) { d.Standardized["a"] += 2e-3 }, 1e-3, true},
		{"intercept jump", func(d *ModelDoc) { d.Intercept += 1000 }, 1e-3, true},
		{"support grows", func(d *ModelDoc) { d.Coefficients["b"] = 1e-9; d.Standardized["b"] = 1e-9 }, 1e-3, true},
		{"support swaps", func(d *ModelDoc) {
			delete(d.Coefficients, "a")
			d.Coefficients["b"] = 0.25
		}, 1e-3, true},
		{"lambda index", func(d *ModelDoc) { d.LambdaIndex++ }, 1e-3, true},
		{"threshold", func(d *ModelDoc) { d.Threshold = &Threshold{Value: 0.7, Mode: "fpr", Target: 0.02} }, 1e-3, true},
		{"threshold removed", func(d *ModelDoc) { d.Threshold = nil }, 1e-3, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			next := base()
			tc.change(next)
			if got := Changed(base(), next, tc.tol); got != tc.want {
				t.Errorf("Changed = %v, want %v", got, tc.want)
			}
		})
	}
	if !Changed(nil, base(), 0) || Changed(nil, nil, 0) {
		t.Error("Changed with nil prev must be true (and false for nil, nil)")
	}
	// Relative part: a value of 1000 moving by 0.5 is below tol 1e-3 relative
	// (0.5 < 1e-3·1000), by 2 is above.
	a, b := base(), base()
	a.Intercept, b.Intercept = 1000, 1000.5
	if Changed(a, b, 1e-3) {
		t.Error("relative move 5e-4 reported as changed at tol 1e-3")
	}
	b.Intercept = 1002
	if !Changed(a, b, 1e-3) {
		t.Error("relative move 2e-3 not reported at tol 1e-3")
	}
}

// TestDocEtaMatchesModel checks the document's predictor against the
// model snapshot's own Model.Eta, including a missing value (imputed with
// the mean, contributing 0 on the standardized scale).
func TestDocEtaMatchesModel(t *testing.T) {
	m := testModel("squared", []float64{0.5, 0, -1.25}, []float64{10, 2, -3}, []float64{2, 1, 0.5}, 0.75)
	doc, err := NewModelDoc(&DocInput{Name: "m", Features: []string{"a", "b", "c"}, Model: m})
	if err != nil {
		t.Fatal(err)
	}
	for _, x := range [][]float64{{11, 3, -2}, {10, 2, -3}, {math.NaN(), 7, -4.5}, {-100, math.NaN(), math.NaN()}} {
		named := map[string]float64{}
		for j, n := range doc.Features {
			if !math.IsNaN(x[j]) {
				named[n] = x[j]
			}
		}
		got, contrib := doc.Eta(named)
		want := m.Eta(x)
		if math.Abs(got-want) > 1e-12*max(1, math.Abs(want)) {
			t.Errorf("x=%v: doc eta %v, Model.Eta %v", x, got, want)
		}
		if _, ok := contrib["b"]; ok || len(contrib) != 2 {
			t.Errorf("contributions %v, want a and c only", contrib)
		}
	}
}

func ExampleNewModelDoc() {
	// A two-feature linear model: θ on the standardized scale, the window's
	// mean and std, and b the standardized intercept (raw coef = θ/s).
	m := &online.Model{
		Loss: "squared", Penalty: online.Lasso(), Lambda: 0.1, Index: 4,
		Intercept: 3 - 2*10/4.0, Coef: []float64{2 / 4.0, 0}, Standardized: []float64{2, 0},
		StdIntercept: 3, Mean: []float64{10, 1}, Std: []float64{4, 0.5},
		Records: 500, Seen: 800,
	}
	doc, err := NewModelDoc(&DocInput{
		Name: "kiln", Version: 3, Features: []string{"temp_c", "fan_amps"}, Model: m,
		Scores:  []online.Score{{Index: 4, Lambda: 0.1, Nonzero: 1, Loss: 0.5, SE: 0.05, RMSE: 1, MAE: 0.8, R2: 0.9}},
		Holdout: 120, Applied: 920, Updated: time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC),
		KKT: 3.1e-13, KKTTol: 1e-6, // the model is the window's optimum to 1e-6
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	enc := json.NewEncoder(os.Stdout)
	enc.SetIndent("", "  ")
	_ = enc.Encode(doc)
	// Output:
	// {
	//   "model": "kiln",
	//   "version": 3,
	//   "loss": "squared",
	//   "penalty": {
	//     "kind": "lasso",
	//     "mix": 1,
	//     "lambda": 0.1
	//   },
	//   "lambda_index": 4,
	//   "intercept": -2,
	//   "coefficients": {
	//     "temp_c": 0.5
	//   },
	//   "standardized": {
	//     "temp_c": 2
	//   },
	//   "features": [
	//     "temp_c",
	//     "fan_amps"
	//   ],
	//   "scale": {
	//     "fan_amps": {
	//       "mean": 1,
	//       "std": 0.5
	//     },
	//     "temp_c": {
	//       "mean": 10,
	//       "std": 4
	//     }
	//   },
	//   "holdout": {
	//     "loss": 0.5,
	//     "se": 0.05,
	//     "rmse": 1,
	//     "mae": 0.8,
	//     "r2": 0.9,
	//     "records": 120
	//   },
	//   "ladder": [
	//     {
	//       "index": 4,
	//       "lambda": 0.1,
	//       "loss": 0.5,
	//       "se": 0.05,
	//       "nonzero": 1,
	//       "rmse": 1,
	//       "mae": 0.8,
	//       "r2": 0.9
	//     }
	//   ],
	//   "records": {
	//     "window": 500,
	//     "holdout": 120,
	//     "seen": 800,
	//     "applied": 920,
	//     "rejected": 0
	//   },
	//   "kkt": 3.1e-13,
	//   "kkt_tolerance": 0.000001,
	//   "updated": "2026-03-04T05:06:07Z"
	// }
}

func ExampleChanged() {
	m := &online.Model{Loss: "squared", Penalty: online.Lasso(), Lambda: 0.1,
		Coef: []float64{0.5}, Standardized: []float64{2}, Mean: []float64{0}, Std: []float64{4}}
	doc := func(version uint64) *ModelDoc {
		d, _ := NewModelDoc(&DocInput{Name: "kiln", Version: version, Features: []string{"temp_c"}, Model: m})
		return d
	}
	prev, next := doc(1), doc(2)
	fmt.Println(Changed(prev, next, 1e-3)) // only the version differs
	next.Standardized["temp_c"] = 2.01     // moved by 0.5 % of 2.01
	fmt.Println(Changed(prev, next, 1e-3))
	// Output:
	// false
	// true
}

func BenchmarkModelDocJSON(b *testing.B) {
	for _, d := range []int{8, 64, 256} {
		doc := wideDoc(b, d)
		b.Run(fmt.Sprintf("d=%d", d), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := json.Marshal(doc); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
