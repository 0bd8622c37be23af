package fit

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// writeCSV writes content to a temporary file and returns its path.
func writeCSV(t *testing.T, content string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "in.csv")
	if err := os.WriteFile(p, []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestFitErrors(t *testing.T) {
	tests := []struct {
		name string
		csv  string
		opt  Options // Input is filled in unless csv is "-"
		want string  // FILE stands for the input path
	}{
		{"empty file", "", Options{Label: "y"}, `fit: FILE: empty file`},
		{"header only", "a,y\n", Options{Label: "y"}, `fit: FILE: no data rows after the header`},
		{"missing label column", "a,b\n1,2\n", Options{Label: "y"},
			`fit: FILE:1: no label column "y" (columns: a, b)`},
		{"non-numeric cell", "a,b,y\n1,2,3\n4,abc,5\n", Options{Label: "y"},
			`fit: FILE:3: column "b": not a number "abc"`},
		{"infinite cell", "a,y\n1,2\nInf,3\n", Options{Label: "y"},
			`fit: FILE:3: column "a": not finite "Inf"`},
		{"out of range cell", "a,y\n1,2\n1e999,3\n", Options{Label: "y"},
			`fit: FILE:3: column "a": not finite "1e999"`},
		{"non-numeric label", "a,y\n1,2\n2,x\n", Options{Label: "y"},
			`fit: FILE:3: column "y": not a number "x"`},
		{"missing label", "a,y\n1,2\n2,\n", Options{Label: "y"},
			`fit: FILE:3: column "y": missing label`},
		{"logistic label 2", "a,y\n1,0\n2,1\n3,2\n", Options{Label: "y", Loss: "logistic"},
			`fit: FILE:4: column "y": logistic label must be 0 or 1 (or true/false), got "2"`},
		{"logistic label 0.5", "a,y\n1,0.5\n", Options{Label: "y", Loss: "logistic"},
			`fit: FILE:2: column "y": logistic label must be 0 or 1 (or true/false), got "0.5"`},
		{"ragged row", "a,y\n1,2\n3,4,5\n", Options{Label: "y"},
			`fit: FILE:3: wrong number of fields`},
		{"duplicate column", "a,b,a,y\n1,2,3,4\n", Options{Label: "y"},
			`fit: FILE:1: column "a": appears twice in the header`},
		{"unnamed column", "a,,y\n1,2,3\n", Options{Label: "y"},
			`fit: FILE:1: column 2 has no name`},
		{"no feature", "id,y\nu1,2\nu2,3\n", Options{Label: "y"},
			`fit: FILE: no numeric feature columns besides the label "y"`},
		{"no input", "-", Options{Label: "y"}, `fit: no input file (--input)`},
		{"no label", "a,y\n1,2\n", Options{}, `fit: no label column (--label)`},
		{"no such file", "-", Options{Input: "/nonexistent/x.csv", Label: "y"},
			`fit: open /nonexistent/x.csv: no such file or directory`},
		{"unknown loss", "a,y\n1,2\n", Options{Label: "y", Loss: "hinge"},
			`fit: unknown loss "hinge" (allowed: squared, logistic)`},
		{"unknown penalty", "a,y\n1,2\n", Options{Label: "y", Penalty: "l1"},
			`fit: unknown penalty "l1" (allowed: lasso, ridge, elastic-net)`},
		{"mix on lasso", "a,y\n1,2\n", Options{Label: "y", Mix: new(0.3)},
			`fit: --mix applies only to elastic-net, not lasso`},
		{"mix out of range", "a,y\n1,2\n", Options{Label: "y", Penalty: "elastic-net", Mix: new(1.5)},
			`fit: elastic-net mix 1.5 must be in (0, 1) (mix 0 is ridge, 1 lasso)`},
		{"mix 0", "a,y\n1,2\n", Options{Label: "y", Penalty: "elastic-net", Mix: new(0.0)},
			`fit: elastic-net mix 0 must be in (0, 1) (mix 0 is ridge, 1 lasso)`},
		{"mix on ridge", "a,y\n1,2\n", Options{Label: "y", Penalty: "ridge", Mix: new(0.0)},
			`fit: --mix applies only to elastic-net, not ridge`},
		{"negative lambda", "a,y\n1,2\n", Options{Label: "y", Lambda: new(-1.0)},
			`fit: lambda -1 must be a finite number >= 0 (0 = unpenalized; leave it out to choose λ on held-out rows)`},
		{"NaN lambda", "a,y\n1,2\n", Options{Label: "y", Lambda: new(math.NaN())},
			`fit: lambda NaN must be a finite number >= 0 (0 = unpenalized; leave it out to choose λ on held-out rows)`},
		{"ladder with lambda", "a,y\n1,2\n", Options{Label: "y", Lambda: new(1.0), Ladder: true},
			`fit: --ladder shows how λ is chosen; it cannot be combined with --lambda`},
		{"unknown rule", "a,y\n1,2\n", Options{Label: "y", Rule: "best"},
			`fit: unknown rule "best" (allowed: one-se, min)`},
		{"constant label", "a,y\n1,2\n2,2\n3,2\n", Options{Label: "y"},
			`fit: FILE: cannot choose λ: the label does not vary; give --lambda`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			o := tt.opt
			if tt.csv != "-" {
				o.Input = writeCSV(t, tt.csv)
			}
			var out bytes.Buffer
			err := Run(&out, o)
			if err == nil {
				t.Fatalf("no error; output:\n%s", out.String())
			}
			want := strings.ReplaceAll(tt.want, "FILE", o.Input)
			if err.Error() != want {
				t.Errorf("error\n got %s\nwant %s", err, want)
			}
			var fe *Error
			if !errors.As(err, &fe) {
				t.Errorf("error %T is not a *Error", err)
			}
			if strings.Contains(err.Error(), "\n") {
				t.Errorf("error is not one line: %q", err)
			}
			if out.Len() != 0 {
				t.Errorf("wrote output on error: %q", out.String())
			}
		})
	}
}

// fitJSON runs Run with JSON output and decodes the document.
func fitJSON(t *testing.T, o Options) *fitDoc {
	t.Helper()
	o.JSON = true
	var out bytes.Buffer
	if err := Run(&out, o); err != nil {
		t.Fatal(err)
	}
	var d fitDoc
	if err := json.Unmarshal(out.Bytes(), &d); err != nil {
		t.Fatalf("%v\n%s", err, out.String())
	}
	return &d
}

// reference is the part of testdata/reference.json that these tests use.
type reference struct {
	Datasets map[string]struct {
		Features []string  `json:"features"`
		Std      []float64 `json:"std"`
	} `json:"datasets"`
	Cases []struct {
		Dataset      string    `json:"dataset"`
		Loss         string    `json:"loss"`
		Alpha        float64   `json:"alpha"`
		Fraction     float64   `json:"lambda_fraction"`
		Lambda       float64   `json:"lambda"`
		Intercept    float64   `json:"intercept"`
		Standardized []float64 `json:"standardized"`
	} `json:"cases"`
}

// TestFitReference fits one reference case per dataset through Run and
// compares with testdata/reference.json (scikit-learn 1.2.1, Debian 12:
// ElasticNet for diabetes, LogisticRegression saga for wdbc; see
// testdata/README.md). The full set of cases is checked on the Ladder itself
// in online/reference_test.go.
func TestFitReference(t *testing.T) {
	b, err := os.ReadFile("../../testdata/reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref reference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		file, label, loss, penalty string
		mix                        *float64
		alpha, fraction            float64
	}{
		{"diabetes.csv", "progression", "squared", "lasso", nil, 1, 0.01},
		{"wdbc.csv", "malignant", "logistic", "elastic-net", new(0.5), 0.5, 0.1},
	}
	for _, tt := range tests {
		dataset := strings.TrimSuffix(tt.file, ".csv")
		t.Run(dataset, func(t *testing.T) {
			i := -1
			for k, c := range ref.Cases {
				if c.Dataset == dataset && c.Alpha == tt.alpha && c.Fraction == tt.fraction {
					i = k
				}
			}
			if i < 0 {
				t.Fatal("case not in reference.json")
			}
			c := ref.Cases[i]
			d := fitJSON(t, Options{Input: "../../testdata/" + tt.file, Label: tt.label, Loss: tt.loss,
				Penalty: tt.penalty, Mix: tt.mix, Lambda: &c.Lambda})
			if !d.Converged || d.KKT > d.Tol {
				t.Errorf("not converged: KKT %g, tol %g", d.KKT, d.Tol)
			}
			if d.Loss != tt.loss || d.Penalty.Kind != tt.penalty || d.Penalty.Mix != tt.alpha || d.Penalty.Lambda != c.Lambda {
				t.Errorf("loss %q penalty %+v; want %s %s α=%g λ=%g", d.Loss, d.Penalty, tt.loss, tt.penalty, tt.alpha, c.Lambda)
			}
			dev := math.Abs(d.StdIntercept - c.Intercept)
			ds := ref.Datasets[dataset]
			for j, name := range ds.Features {
				want := c.Standardized[j]
				got, ok := d.Standardized[name]
				if ok != (want != 0) {
					t.Errorf("%s: in support %v, reference %v (θ_ref = %g)", name, ok, want != 0, want)
				}
				dev = max(dev, math.Abs(got-want))
				// Raw units: θ_j / s_j (README.md, "The objective").
				if raw := d.Coefficients[name]; math.Abs(raw-got/ds.Std[j]) > 1e-9*max(1, math.Abs(raw)) {
					t.Errorf("%s: raw coefficient %g, θ/s = %g", name, raw, got/ds.Std[j])
				}
			}
			if dev > 1e-4 {
				t.Errorf("max |θ − θ_ref| = %.3g > 1e-4", dev)
			}
			if rows := map[string]int{"diabetes": 442, "wdbc": 569}[dataset]; d.Records != rows {
				t.Errorf("records %d, want %d", d.Records, rows)
			}
			t.Logf("max deviation from reference %.2g, KKT %.2g", dev, d.KKT)
		})
	}
}

// TestFitInput checks the CSV conventions: text columns are skipped, empty
// and NA cells are missing values, true/false logistic labels.
func TestFitInput(t *testing.T) {
	p := writeCSV(t, "\ufeffid, a ,b,y\n"+
		"u1,1,NA,false\nu2,2,0.5,true\nu3,3,,0\nu4,4,1.5,1\nu5,1,0.2,0\nu6,5,1,1\n")
	d := fitJSON(t, Options{Input: p, Label: "y", Loss: "logistic", Penalty: "ridge", Lambda: new(0.1)})
	if strings.Join(d.Features, ",") != "a,b" || strings.Join(d.Skipped, ",") != "id" {
		t.Errorf("features %q skipped %q; want [a b] [id]", d.Features, d.Skipped)
	}
	if d.Records != 6 || d.Nonzero != 2 {
		t.Errorf("records %d nonzero %d; want 6, 2", d.Records, d.Nonzero)
	}
	// Missing cells are imputed by the learner, so b's scale stays within
	// its present values.
	if s := d.Scale["b"]; !(s.Mean >= 0.2 && s.Mean <= 1.5 && s.Std > 0 && s.Std < 1.5) {
		t.Errorf("scale of b = %+v", s)
	}
}

// TestFitChoose checks the default λ choice on the invented pump data: the
// strong drivers of the trip are in the support, noise channels are not,
// and the ladder marks exactly one member.
func TestFitChoose(t *testing.T) {
	d := fitJSON(t, Options{Input: "../../testdata/demo-pump.csv", Label: "trip", Loss: "logistic", Ladder: true})
	// make_demo_pump.go drives the trip with vibration, bearing temperature,
	// suction pressure (strongly) and motor current (weakly); oil level and
	// ambient temperature are pure noise.
	for _, name := range []string{"vib_de_mm_s", "bearing_de_c", "suction_kpa"} {
		if _, ok := d.Standardized[name]; !ok {
			t.Errorf("%s not in the support %v", name, d.Standardized)
		}
	}
	for _, name := range []string{"oil_level_pct", "ambient_c"} {
		if _, ok := d.Standardized[name]; ok {
			t.Errorf("noise channel %s in the one-se support %v", name, d.Standardized)
		}
	}
	if d.Standardized["suction_kpa"] >= 0 || d.Standardized["vib_de_mm_s"] <= 0 {
		t.Errorf("signs: suction %g (want < 0), vibration %g (want > 0)", d.Standardized["suction_kpa"], d.Standardized["vib_de_mm_s"])
	}
	sel := d.Selection
	if sel == nil || sel.Rule != "one-se" || sel.Holdout != 400 || sel.Train != 1600 {
		t.Fatalf("selection %+v; want one-se, 1600 train, 400 held out", sel)
	}
	chosen := 0
	for _, r := range d.Ladder {
		if r.Chosen {
			chosen++
			if r.Lambda != d.Penalty.Lambda || r.Index != sel.Index {
				t.Errorf("chosen member λ %g index %d; model λ %g, selection index %d", r.Lambda, r.Index, d.Penalty.Lambda, sel.Index)
			}
		}
	}
	if len(d.Ladder) != 12 || chosen != 1 {
		t.Errorf("ladder of %d members, %d chosen; want 12, 1", len(d.Ladder), chosen)
	}
	if !d.Converged {
		t.Errorf("refit not converged: KKT %g", d.KKT)
	}
}

// ExampleRun fits the lasso at one λ on the diabetes data of Efron et al.
// (2004) and prints the nonzero coefficients. The standardized column and
// the intercept agree to the digits shown with scikit-learn 1.2.1 (Debian 12)
// Lasso(alpha=4.5, tol=1e-12) on the same data standardized with ddof 0.
func ExampleRun() {
	err := Run(os.Stdout, Options{
		Input:  "../../testdata/diabetes.csv",
		Label:  "progression",
		Lambda: new(4.5),
	})
	if err != nil {
		panic(err)
	}
	// Output:
	// input    ../../testdata/diabetes.csv (442 records, 10 features, label progression)
	// model    squared loss, lasso (α = 1), λ = 4.5, λ_max = 45.16
	// KKT      ≤ 1e-09 (converged)
	// nonzero  5 of 10
	//
	// feature      coefficient  standardized  mean     std
	// (intercept)  -218.675     152.133
	// bmi          5.50278      24.2844       26.3758  4.41312
	// s5           40.9397      21.3623       4.64141  0.521799
	// bp           0.785347     10.8501       94.647   13.8156
	// s3           -0.595969    -7.69965      49.7885  12.9196
	// sex          -6.13497     -3.06132      1.46833  0.498996
}

// TestFitOutput checks the table form: the selection line, the ladder with
// exactly one marked member, and with too few rows to hold any out the
// documented fallback λ = 0.01·λ_max.
func TestFitOutput(t *testing.T) {
	tests := []struct {
		name string
		opt  Options
		want []string // substrings, in order
	}{
		{"ladder", Options{Input: "../../testdata/diabetes.csv", Label: "progression", Ladder: true},
			[]string{"λ chosen  rule one-se on 88 held-out rows (1 in 5)", "KKT       ≤ 1e-09 (converged)",
				"ladder on 354 training rows", "index  lambda", "<- one-se"}},
		{"min rule", Options{Input: "../../testdata/diabetes.csv", Label: "progression", Rule: "min", Ladder: true},
			[]string{"λ chosen  rule min", "<- min"}},
		{"few rows", Options{Input: writeCSV(t, "a,b,y\n1,0,1\n2,1,3\n3,0,2\n4,1,5\n5,1,4\n6,0,7\n"), Label: "y"},
			[]string{"λ chosen  0.01·λ_max (too few rows to hold any out)"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var out bytes.Buffer
			if err := Run(&out, tt.opt); err != nil {
				t.Fatal(err)
			}
			s := out.String()
			rest := s
			for _, w := range tt.want {
				i := strings.Index(rest, w)
				if i < 0 {
					t.Fatalf("output lacks %q (in order):\n%s", w, s)
				}
				rest = rest[i+len(w):]
			}
			if strings.Count(s, "<- ") > 1 {
				t.Errorf("more than one member marked:\n%s", s)
			}
			for _, line := range strings.Split(s, "\n") {
				if strings.HasSuffix(line, " ") {
					t.Errorf("trailing blank in %q", line)
				}
			}
		})
	}
	d := fitJSON(t, Options{Input: writeCSV(t, "a,b,y\n1,0,1\n2,1,3\n3,0,2\n4,1,5\n5,1,4\n6,0,7\n"), Label: "y"})
	if d.Selection == nil || d.Selection.Rule != "fraction" || math.Abs(d.Penalty.Lambda-0.01*d.Selection.LambdaMax) > 1e-15 {
		t.Errorf("few rows: selection %+v, λ %g; want λ = 0.01·λ_max", d.Selection, d.Penalty.Lambda)
	}
}
