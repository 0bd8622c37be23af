package pipeline

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/record"
)

// TestReferenceThroughPipeline streams each open dataset once through a
// pipeline with a fixed λ, the holdout off and no idle time (2 streaming
// steps per record, the default), publishes once, and compares the
// published model with every case of testdata/reference.json: made with
// scikit-learn 1.2.1 and numpy 1.24.2 (Debian 12; ElasticNet, the numpy
// ridge closed form, LogisticRegression saga/lbfgs polished by FISTA; see
// testdata/README.md) on diabetes (Efron, Hastie, Johnstone & Tibshirani
// 2004) and wdbc (Street, Wolberg & Mangasarian 1993). The streaming steps
// alone are far from these after one pass; the published model must match
// them anyway: the same support, |θ − θ_ref| and |b − b_ref| ≤ 1e-4 (the
// tolerance of online/reference_test.go), and a KKT residual ≤ 1e-6.
func TestReferenceThroughPipeline(t *testing.T) {
	b, err := os.ReadFile("../../testdata/reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Datasets map[string]struct {
			File     string   `json:"file"`
			Label    string   `json:"label"`
			Features []string `json:"features"`
		} `json:"datasets"`
		Cases []struct {
			Dataset      string    `json:"dataset"`
			Loss         string    `json:"loss"`
			Alpha        float64   `json:"alpha"`
			Lambda       float64   `json:"lambda"`
			Fraction     float64   `json:"lambda_fraction"`
			Intercept    float64   `json:"intercept"`
			Standardized []float64 `json:"standardized"`
		} `json:"cases"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	for _, c := range ref.Cases {
		ds := ref.Datasets[c.Dataset]
		t.Run(fmt.Sprintf("%s/alpha=%g/lambda=%g*max", c.Dataset, c.Alpha, c.Fraction), func(t *testing.T) {
			x, y := readCSV(t, "../../testdata/"+ds.File, ds.Label, ds.Features)
			m := config.DefaultModel()
			m.Name, m.Subject, m.Loss = "ref", "test.ref", c.Loss
			m.Penalty, m.Mix = config.PenaltyElasticNet, c.Alpha
			switch c.Alpha {
			case 1:
				m.Penalty, m.Mix = config.PenaltyLasso, 0
			case 0:
				m.Penalty, m.Mix = config.PenaltyRidge, 0
			}
			m.Lambda = c.Lambda
			m.Features, m.MaxFeatures = ds.Features, len(ds.Features)
			m.Window.Records = len(y)
			m.Holdout.Every = 0
			h := newHarness(t, m)
			var rec record.Record
			for i := range y {
				rec.X, rec.Y, rec.W = append(rec.X[:0], x[i]...), y[i], 1
				if _, err := h.p.Apply(&rec, h.names, h.now); err != nil {
					t.Fatal(err)
				}
			}
			s, err := h.p.Publish(h.now.Add(time.Second), 0, true)
			if err != nil || s == nil {
				t.Fatalf("no publication (%v)", err)
			}
			doc := s.Doc
			if !doc.Exact() || *doc.KKT > 1e-6 {
				t.Fatalf("KKT %v, tolerance %g", doc.KKT, doc.KKTTolerance)
			}
			dev := math.Abs(s.Model.StdIntercept - c.Intercept)
			for j, name := range ds.Features {
				got, ok := doc.Standardized[name]
				if ok != (c.Standardized[j] != 0) {
					t.Errorf("%s: published %g, reference %g (support differs)", name, got, c.Standardized[j])
				}
				dev = max(dev, math.Abs(got-c.Standardized[j]))
			}
			if dev > 1e-4 {
				t.Errorf("max |θ − θ_ref| = %.3g > 1e-4 (KKT %g)", dev, *doc.KKT)
			}
		})
	}
}

// readCSV reads a CSV file with a header row: the features in the given
// order, and the label column.
func readCSV(t *testing.T, path, label string, features []string) ([][]float64, []float64) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := func(name string) int {
		i := slices.Index(rows[0], name)
		if i < 0 {
			t.Fatalf("%s: no column %q", path, name)
		}
		return i
	}
	li := col(label)
	idx := make([]int, len(features))
	for j, name := range features {
		idx[j] = col(name)
	}
	var x [][]float64
	var y []float64
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	for _, r := range rows[1:] {
		row := make([]float64, len(idx))
		for j, c := range idx {
			row[j] = num(r[c])
		}
		x = append(x, row)
		y = append(y, num(r[li]))
	}
	return x, y
}
