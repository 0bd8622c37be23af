package sink

import (
	"encoding/xml"
	"math"
	"strconv"
	"strings"
	"testing"

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
