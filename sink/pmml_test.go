package sink

import (
	"encoding/xml"
	"maps"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"lariat/online"
)

// evalPMML evaluates a parsed RegressionModel on x (absent = missing) the
// way PMML 4.4 defines it (value from memory of the DMG specification):
// missing active fields take missingValueReplacement, the first
// RegressionTable gives y₁ = intercept + Σ coefficient·x, and for
// classification with normalizationMethod "logit" p₁ = 1/(1 + e^−y₁).
func evalPMML(t *testing.T, p *pmmlDoc, x map[string]float64) (eta, prob float64) {
	t.Helper()
	replace := map[string]float64{}
	for _, f := range p.Model.MiningSchema.Fields {
		if f.MissingValueReplacement != "" {
			replace[f.Name] = parseF(t, f.MissingValueReplacement)
		}
	}
	tb := p.Model.Tables[0]
	eta = parseF(t, tb.Intercept)
	for _, np := range tb.Predictors {
		v, ok := x[np.Name]
		if !ok {
			v = replace[np.Name]
		}
		eta += parseF(t, np.Coefficient) * math.Pow(v, float64(np.Exponent))
	}
	if p.Model.NormalizationMethod == "logit" {
		prob = 1 / (1 + math.Exp(-eta))
	}
	return eta, prob
}

func parseF(t *testing.T, s string) float64 {
	t.Helper()
	f, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("PMML number %q: %v", s, err)
	}
	return f
}

func TestPMMLRoundTrip(t *testing.T) {
	for _, tc := range []struct {
		loss, function, norm string
		tables               int
	}{
		{"squared", "regression", "none", 1},
		{"logistic", "classification", "logit", 2},
	} {
		t.Run(tc.loss, func(t *testing.T) {
			m := testModel(tc.loss, []float64{0.5, 0, -1.25, 3e-9}, []float64{10, 2, -3, 1e6}, []float64{2, 1, 0.5, 1e5}, 0.75)
			names := []string{"a", "b", "y", "big"} // a feature named y forces the target to be renamed
			doc, err := NewModelDoc(&DocInput{Name: "m-" + tc.loss, Version: 2, Features: names, Model: m})
			if err != nil {
				t.Fatal(err)
			}
			b, err := PMML(doc)
			if err != nil {
				t.Fatal(err)
			}
			var p pmmlDoc
			if err := xml.Unmarshal(b, &p); err != nil {
				t.Fatalf("output does not parse: %v\n%s", err, b)
			}
			if p.XMLName.Space != pmmlNamespace || p.Version != "4.4" {
				t.Errorf("root = %v version %q", p.XMLName, p.Version)
			}
			if p.Model.FunctionName != tc.function || p.Model.NormalizationMethod != tc.norm || len(p.Model.Tables) != tc.tables {
				t.Errorf("model = %s/%s with %d tables", p.Model.FunctionName, p.Model.NormalizationMethod, len(p.Model.Tables))
			}
			if tc.tables == 2 && (p.Model.Tables[0].TargetCategory != "1" || p.Model.Tables[1].TargetCategory != "0" ||
				p.Model.Tables[1].Intercept != "0" || len(p.Model.Tables[1].Predictors) != 0) {
				t.Errorf("logistic tables = %+v", p.Model.Tables)
			}
			if n := len(p.DataDictionary.Fields); n != 5 || p.DataDictionary.NumberOfFields != 5 || p.DataDictionary.Fields[4].Name != "y_" {
				t.Errorf("data dictionary = %+v", p.DataDictionary)
			}
			if n := len(p.Model.Tables[0].Predictors); n != 3 {
				t.Errorf("%d numeric predictors, want 3 (b has coefficient 0)", n)
			}
			for _, x := range [][]float64{{11, 3, -2, 2e6}, {10, 2, -3, 1e6}, {math.NaN(), 7, -4.5, math.NaN()}} {
				named := map[string]float64{}
				for j, n := range names {
					if !math.IsNaN(x[j]) {
						named[n] = x[j]
					}
				}
				eta, prob := evalPMML(t, &p, named)
				want := m.Eta(x)
				if math.Abs(eta-want) > 1e-12*max(1, math.Abs(want)) {
					t.Errorf("x=%v: PMML %v, Model.Eta %v", x, eta, want)
				}
				if tc.loss == "logistic" && math.Abs(prob-online.Sigmoid(want)) > 1e-12 {
					t.Errorf("x=%v: PMML probability %v, σ(η) %v", x, prob, online.Sigmoid(want))
				}
			}
		})
	}
}

func TestPMMLHeader(t *testing.T) {
	b, err := PMML(testDoc(t, "pump", "logistic", 17))
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for _, want := range []string{
		`<?xml version="1.0" encoding="UTF-8"?>`,
		`<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4">`,
		`modelVersion="17"`,
		`<Timestamp>2026-03-04T05:06:07Z</Timestamp>`,
		`usageType="target"`,
		`missingValueTreatment="asMean"`,
		`feature="probability" value="1"`,
	} {
		if !strings.Contains(s, want) {
			t.Errorf("PMML lacks %s:\n%s", want, s)
		}
	}
}

// rawElement is one start tag of an XML document read from its text alone:
// its path from the root ("PMML/RegressionModel/RegressionTable") and its
// attributes.
type rawElement struct {
	path  string
	attrs map[string]string
}

var (
	rawTag  = regexp.MustCompile(`<(/?)([A-Za-z_][-\w.]*)((?:\s+[A-Za-z_:][-\w.:]*="[^"]*")*)\s*(/?)>`)
	rawAttr = regexp.MustCompile(`([A-Za-z_:][-\w.:]*)="([^"]*)"`)
)

// rawElements lists the start tags of s in document order. It reads the
// text with regular expressions, not with encoding/xml and the structs that
// wrote it, so that a golden check does not depend on them.
func rawElements(t *testing.T, s string) []rawElement {
	t.Helper()
	var out []rawElement
	var stack []string
	for _, m := range rawTag.FindAllStringSubmatch(s, -1) {
		if m[1] == "/" {
			if len(stack) == 0 || stack[len(stack)-1] != m[2] {
				t.Fatalf("unbalanced </%s> in\n%s", m[2], s)
			}
			stack = stack[:len(stack)-1]
			continue
		}
		e := rawElement{path: strings.Join(append(stack, m[2]), "/"), attrs: map[string]string{}}
		for _, a := range rawAttr.FindAllStringSubmatch(m[3], -1) {
			e.attrs[a[1]] = a[2]
		}
		out = append(out, e)
		if m[4] != "/" {
			stack = append(stack, m[2])
		}
	}
	if len(stack) != 0 {
		t.Fatalf("unclosed elements %v in\n%s", stack, s)
	}
	return out
}

// TestPMMLGolden checks the raw XML of a tiny linear and a tiny logistic
// model (features a and b; θ = (0.5, −1), mean (1, 4), std (1, 2), standardized
// intercept 0.25, so raw coefficients 0.5 and −0.5 and intercept
// 0.25 − (0.5·1/1 − 1·4/2) = 1.75) against the element and attribute names of
// a PMML 4.4 RegressionModel. Source: PMML 4.4, Data Mining Group, value
// from memory: root PMML with version="4.4" and
// xmlns="http://www.dmg.org/PMML-4_4"; Header, DataDictionary and the model
// in that order; DataField name/optype/dataType (Value children for a
// categorical field); RegressionModel functionName "regression" or
// "classification" with normalizationMethod "logit" for the logistic
// model; MiningSchema before the RegressionTables, with MiningField
// usageType "active" or "target"; RegressionTable intercept (and
// targetCategory for classification, the second category's table with
// intercept 0 and no predictors); NumericPredictor name/exponent/coefficient.
func TestPMMLGolden(t *testing.T) {
	type el struct {
		path  string
		attrs map[string]string // these attributes, with these values
		exact bool              // and no others
	}
	const (
		root  = "PMML"
		dd    = root + "/DataDictionary"
		model = root + "/RegressionModel"
		ms    = model + "/MiningSchema"
		table = model + "/RegressionTable"
		np    = table + "/NumericPredictor"
	)
	common := []el{
		{root, map[string]string{"version": "4.4", "xmlns": "http://www.dmg.org/PMML-4_4"}, true},
		{root + "/Header", map[string]string{}, false},
		{dd, map[string]string{"numberOfFields": "3"}, true},
		{dd + "/DataField", map[string]string{"name": "a", "optype": "continuous", "dataType": "double"}, true},
		{dd + "/DataField", map[string]string{"name": "b", "optype": "continuous", "dataType": "double"}, true},
	}
	mining := []el{
		{ms, map[string]string{}, true},
		{ms + "/MiningField", map[string]string{"name": "a", "usageType": "active", "missingValueReplacement": "1", "missingValueTreatment": "asMean"}, true},
		{ms + "/MiningField", map[string]string{"name": "b", "usageType": "active", "missingValueReplacement": "4", "missingValueTreatment": "asMean"}, true},
		{ms + "/MiningField", map[string]string{"name": "y", "usageType": "target"}, true},
	}
	predictors := []el{
		{np, map[string]string{"name": "a", "exponent": "1", "coefficient": "0.5"}, true},
		{np, map[string]string{"name": "b", "exponent": "1", "coefficient": "-0.5"}, true},
	}
	for _, tc := range []struct {
		loss string
		want []el // in document order, among the elements of the paths listed
	}{
		{"squared", slices.Concat(common,
			[]el{
				{dd + "/DataField", map[string]string{"name": "y", "optype": "continuous", "dataType": "double"}, true},
				{model, map[string]string{"functionName": "regression", "normalizationMethod": "none"}, false},
			},
			mining,
			[]el{{table, map[string]string{"intercept": "1.75"}, true}},
			predictors)},
		{"logistic", slices.Concat(common,
			[]el{
				{dd + "/DataField", map[string]string{"name": "y", "optype": "categorical", "dataType": "integer"}, true},
				{dd + "/DataField/Value", map[string]string{"value": "0"}, true},
				{dd + "/DataField/Value", map[string]string{"value": "1"}, true},
				{model, map[string]string{"functionName": "classification", "normalizationMethod": "logit"}, false},
			},
			mining,
			[]el{{table, map[string]string{"intercept": "1.75", "targetCategory": "1"}, true}},
			predictors,
			[]el{{table, map[string]string{"intercept": "0", "targetCategory": "0"}, true}})},
	} {
		t.Run(tc.loss, func(t *testing.T) {
			m := testModel(tc.loss, []float64{0.5, -1}, []float64{1, 4}, []float64{1, 2}, 0.25)
			doc, err := NewModelDoc(&DocInput{Name: "tiny", Version: 3, Features: []string{"a", "b"}, Model: m,
				Updated: time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC)})
			if err != nil {
				t.Fatal(err)
			}
			b, err := PMML(doc)
			if err != nil {
				t.Fatal(err)
			}
			s := string(b)
			if !strings.HasPrefix(s, `<?xml version="1.0" encoding="UTF-8"?>`) {
				t.Errorf("no XML declaration:\n%s", s)
			}
			paths := map[string]bool{}
			for _, w := range tc.want {
				paths[w.path] = true
			}
			var got []rawElement
			for _, e := range rawElements(t, s) {
				if paths[e.path] {
					got = append(got, e)
				}
			}
			if len(got) != len(tc.want) {
				t.Fatalf("%d elements on the checked paths, want %d:\n%s", len(got), len(tc.want), s)
			}
			for i, w := range tc.want {
				g := got[i]
				if g.path != w.path {
					t.Errorf("element %d is %s, want %s", i, g.path, w.path)
					continue
				}
				if w.exact && !maps.Equal(g.attrs, w.attrs) {
					t.Errorf("%s: attributes %v, want exactly %v", w.path, g.attrs, w.attrs)
				}
				for k, v := range w.attrs {
					if g.attrs[k] != v {
						t.Errorf("%s: %s=%q, want %q", w.path, k, g.attrs[k], v)
					}
				}
			}
			if t.Failed() {
				t.Logf("PMML:\n%s", s)
			}
		})
	}
}
