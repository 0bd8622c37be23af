package sink_test

// An evaluator of PMML 4.4 RegressionModel documents written from the
// specification's rules, independent of the exporter: its own structs, its
// own list of the element and attribute names PMML 4.4 defines, and its own
// arithmetic. Source for every rule below: PMML 4.4, Data Mining Group,
// "General Structure", "Data Dictionary", "Mining Schema", "Output" and
// "Regression" pages, from memory (not checked against the published XSD).

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"testing"
	"time"

	"lariat/online"
	"lariat/sink"
)

const pmml44NS = "http://www.dmg.org/PMML-4_4"

// pmml44Names maps each element PMML 4.4 defines that a RegressionModel
// document may use to its attributes and its child elements (from memory of
// the specification pages named above; the Extension element is allowed
// everywhere the specification allows it, which is nearly everywhere).
var pmml44Names = map[string]struct{ attrs, children []string }{
	"PMML": {[]string{"version"},
		[]string{"Header", "MiningBuildTask", "DataDictionary", "TransformationDictionary", "RegressionModel", "Extension"}},
	"Header":      {[]string{"copyright", "description", "modelVersion"}, []string{"Extension", "Application", "Annotation", "Timestamp"}},
	"Application": {[]string{"name", "version"}, []string{"Extension"}},
	"Annotation":  {nil, []string{"Extension"}},
	"Timestamp":   {nil, []string{"Extension"}},
	"DataDictionary": {[]string{"numberOfFields"},
		[]string{"Extension", "DataField", "Taxonomy"}},
	"DataField": {[]string{"name", "displayName", "optype", "dataType", "taxonomy", "isCyclic"},
		[]string{"Extension", "Interval", "Value"}},
	"Value":    {[]string{"value", "displayValue", "property"}, []string{"Extension"}},
	"Interval": {[]string{"closure", "leftMargin", "rightMargin"}, []string{"Extension"}},
	"RegressionModel": {[]string{"modelName", "functionName", "algorithmName", "modelType", "targetFieldName", "normalizationMethod", "isScorable"},
		[]string{"Extension", "MiningSchema", "Output", "ModelStats", "ModelExplanation", "Targets", "LocalTransformations", "RegressionTable", "ModelVerification"}},
	"MiningSchema": {nil, []string{"Extension", "MiningField"}},
	"MiningField": {[]string{"name", "usageType", "optype", "importance", "outliers", "lowValue", "highValue",
		"missingValueReplacement", "missingValueTreatment", "invalidValueTreatment", "invalidValueReplacement"},
		[]string{"Extension"}},
	"Output": {nil, []string{"Extension", "OutputField"}},
	"OutputField": {[]string{"name", "displayName", "optype", "dataType", "targetField", "feature", "value",
		"ruleFeature", "algorithm", "rank", "rankBasis", "rankOrder", "isMultiValued", "segmentId", "isFinalResult"},
		[]string{"Extension", "Decisions", "Value"}},
	"RegressionTable":  {[]string{"intercept", "targetCategory"}, []string{"Extension", "NumericPredictor", "CategoricalPredictor", "PredictorTerm"}},
	"NumericPredictor": {[]string{"name", "exponent", "coefficient"}, []string{"Extension"}},
	"Extension":        {[]string{"extender", "name", "value"}, nil},
}

// checkPMMLNames reads b token by token and returns an error for XML that
// is not well formed, an element outside the PMML 4.4 namespace, an element
// or attribute not in pmml44Names, or an element where its parent does not
// allow it. The root must be PMML.
func checkPMMLNames(b []byte) error {
	dec := xml.NewDecoder(bytes.NewReader(b))
	dec.Strict = true
	var stack []string
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			return fmt.Errorf("not well formed: %w", err)
		}
		switch tok := tok.(type) {
		case xml.StartElement:
			name := tok.Name.Local
			if tok.Name.Space != pmml44NS {
				return fmt.Errorf("element %s in namespace %q", name, tok.Name.Space)
			}
			spec, ok := pmml44Names[name]
			if !ok {
				return fmt.Errorf("element %s is not a PMML 4.4 element", name)
			}
			if len(stack) == 0 && name != "PMML" {
				return fmt.Errorf("root element %s, want PMML", name)
			}
			if len(stack) > 0 {
				parent := stack[len(stack)-1]
				if name != "Extension" && !slices.Contains(pmml44Names[parent].children, name) {
					return fmt.Errorf("element %s inside %s", name, parent)
				}
			}
			for _, a := range tok.Attr {
				if a.Name.Space == "" && a.Name.Local == "xmlns" || a.Name.Space == "xmlns" {
					continue // a namespace declaration, not an attribute
				}
				if a.Name.Space != "" || !slices.Contains(spec.attrs, a.Name.Local) {
					return fmt.Errorf("attribute %s of %s is not a PMML 4.4 attribute", a.Name.Local, name)
				}
			}
			stack = append(stack, name)
		case xml.EndElement:
			stack = stack[:len(stack)-1] // the strict decoder matched it
		}
	}
	if len(stack) != 0 {
		return fmt.Errorf("unclosed elements %v", stack)
	}
	return nil
}

// The evaluator's own view of the document.
type evPMML struct {
	XMLName xml.Name `xml:"http://www.dmg.org/PMML-4_4 PMML"`
	Version string   `xml:"version,attr"`
	Fields  []struct {
		Name     string `xml:"name,attr"`
		OpType   string `xml:"optype,attr"`
		DataType string `xml:"dataType,attr"`
		Values   []struct {
			Value string `xml:"value,attr"`
		} `xml:"Value"`
	} `xml:"DataDictionary>DataField"`
	Model struct {
		FunctionName        string `xml:"functionName,attr"`
		NormalizationMethod string `xml:"normalizationMethod,attr"`
		Mining              []struct {
			Name        string  `xml:"name,attr"`
			UsageType   string  `xml:"usageType,attr"`
			Replacement *string `xml:"missingValueReplacement,attr"`
			Treatment   string  `xml:"missingValueTreatment,attr"`
		} `xml:"MiningSchema>MiningField"`
		Tables []struct {
			Intercept      *string `xml:"intercept,attr"`
			TargetCategory string  `xml:"targetCategory,attr"`
			Predictors     []struct {
				Name        string  `xml:"name,attr"`
				Exponent    *string `xml:"exponent,attr"`
				Coefficient *string `xml:"coefficient,attr"`
			} `xml:"NumericPredictor"`
		} `xml:"RegressionTable"`
	} `xml:"RegressionModel"`
}

// evResult is a PMML evaluation: the first table's value y and, for
// classification, each target category's probability.
type evResult struct {
	y    float64
	prob map[string]float64
}

var errMissing = errors.New("missing input without a replacement value")

// evalRegression evaluates p on x (absent = missing) by the PMML 4.4 rules:
//
//   - MiningSchema: an active field with a missing value takes the
//     MiningField's missingValueReplacement when it has one (the treatment
//     attribute — asMean, asMode, … — only says how the value was chosen);
//     without one the RegressionModel's result is missing (an error here).
//   - Regression: each RegressionTable's value is
//     y = intercept + Σ coefficient·x^exponent over its NumericPredictors,
//     exponent defaulting to 1.
//   - functionName "regression": the prediction is y, after the
//     normalizationMethod ("none" leaves it unchanged; only "none" is
//     accepted here).
//   - functionName "classification" with two tables and normalizationMethod
//     "logit": the first table's category gets p₁ = 1/(1 + e^−y₁), the
//     other p₂ = 1 − p₁.
func evalRegression(p *evPMML, x map[string]float64) (evResult, error) {
	num := func(s *string, what string) (float64, error) {
		if s == nil {
			return 0, fmt.Errorf("%s: required attribute absent", what)
		}
		f, err := strconv.ParseFloat(*s, 64)
		if err != nil {
			return 0, fmt.Errorf("%s: %w", what, err)
		}
		return f, nil
	}
	declared := map[string]bool{}
	for _, f := range p.Fields {
		declared[f.Name] = true
	}
	active := map[string]*string{}
	targets := 0
	for _, f := range p.Model.Mining {
		if !declared[f.Name] {
			return evResult{}, fmt.Errorf("MiningField %s not in the DataDictionary", f.Name)
		}
		switch f.UsageType {
		case "", "active":
			active[f.Name] = f.Replacement
		case "target", "predicted":
			targets++
		default:
			return evResult{}, fmt.Errorf("MiningField %s: usageType %q", f.Name, f.UsageType)
		}
	}
	if targets != 1 {
		return evResult{}, fmt.Errorf("%d target fields, want 1", targets)
	}
	tables := p.Model.Tables
	ys := make([]float64, len(tables))
	for i, tb := range tables {
		y, err := num(tb.Intercept, "intercept")
		if err != nil {
			return evResult{}, err
		}
		for _, np := range tb.Predictors {
			repl, ok := active[np.Name]
			if !ok {
				return evResult{}, fmt.Errorf("NumericPredictor %s is not an active MiningField", np.Name)
			}
			v, present := x[np.Name]
			if !present {
				if repl == nil {
					return evResult{}, fmt.Errorf("%s: %w", np.Name, errMissing)
				}
				if v, err = num(repl, np.Name+" missingValueReplacement"); err != nil {
					return evResult{}, err
				}
			}
			c, err := num(np.Coefficient, np.Name+" coefficient")
			if err != nil {
				return evResult{}, err
			}
			e := 1.0
			if np.Exponent != nil {
				if e, err = num(np.Exponent, np.Name+" exponent"); err != nil {
					return evResult{}, err
				}
			}
			y += c * math.Pow(v, e)
		}
		ys[i] = y
	}
	switch m := p.Model; {
	case m.FunctionName == "regression" && m.NormalizationMethod == "none" && len(tables) == 1:
		return evResult{y: ys[0]}, nil
	case m.FunctionName == "classification" && m.NormalizationMethod == "logit" && len(tables) == 2:
		p1 := 1 / (1 + math.Exp(-ys[0]))
		return evResult{y: ys[0], prob: map[string]float64{tables[0].TargetCategory: p1, tables[1].TargetCategory: 1 - p1}}, nil
	default:
		return evResult{}, fmt.Errorf("functionName %q, normalizationMethod %q with %d tables: not evaluated here",
			m.FunctionName, m.NormalizationMethod, len(tables))
	}
}

// randomDoc returns a seeded random model document with d features, about
// a third of them with coefficient 0.
func randomDoc(t *testing.T, rng *rand.Rand, loss string, d int) *sink.ModelDoc {
	t.Helper()
	names := make([]string, d)
	theta, mean, std := make([]float64, d), make([]float64, d), make([]float64, d)
	for j := range d {
		names[j] = fmt.Sprintf("ch_%02d", j)
		if rng.IntN(3) > 0 {
			theta[j] = rng.NormFloat64()
		}
		mean[j] = 100 * rng.NormFloat64()
		std[j] = math.Exp(2 * rng.NormFloat64())
	}
	b := rng.NormFloat64()
	coef := make([]float64, d)
	intercept := b
	for j := range d {
		coef[j] = theta[j] / std[j]
		intercept -= theta[j] * mean[j] / std[j]
	}
	m := &online.Model{
		Loss: loss, Penalty: online.Lasso(), Lambda: 0.01, Index: 4,
		Intercept: intercept, Coef: coef, Standardized: theta, StdIntercept: b,
		Mean: mean, Std: std, Records: 1000, Weight: 1000, Seen: 1000,
	}
	doc, err := sink.NewModelDoc(&sink.DocInput{Name: "rand-" + loss, Version: 7, Features: names, Model: m,
		Updated: time.Date(2026, 5, 6, 7, 8, 9, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

// TestPMMLEvaluatedFromSpec writes a random linear and a random logistic
// model as PMML, checks the names in the document against PMML 4.4 and
// evaluates it on 1,000 seeded random records (a tenth of the values
// missing) with evalRegression; the linear predictor and the probability
// agree with sink.Predict, the evaluation behind the daemon's /predict
// answers, to 1e-9 relative.
func TestPMMLEvaluatedFromSpec(t *testing.T) {
	for _, loss := range []string{"squared", "logistic"} {
		t.Run(loss, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(44, uint64(len(loss))))
			doc := randomDoc(t, rng, loss, 30)
			b, err := sink.PMML(doc)
			if err != nil {
				t.Fatal(err)
			}
			if err := checkPMMLNames(b); err != nil {
				t.Fatalf("%v\n%s", err, b)
			}
			var p evPMML
			if err := xml.Unmarshal(b, &p); err != nil {
				t.Fatal(err)
			}
			if p.Version != "4.4" {
				t.Errorf("version %q", p.Version)
			}
			for i := range 1000 {
				x := map[string]float64{}
				for _, f := range doc.Features {
					if rng.IntN(10) > 0 {
						sc := doc.Scale[f]
						x[f] = sc.Mean + 3*sc.Std*rng.NormFloat64()
					}
				}
				got, err := evalRegression(&p, x)
				if err != nil {
					t.Fatalf("record %d: %v", i, err)
				}
				want, err := sink.Predict(doc, x)
				if err != nil {
					t.Fatalf("record %d: %v", i, err)
				}
				if math.Abs(got.y-want.Eta) > 1e-9*math.Max(1, math.Abs(want.Eta)) {
					t.Fatalf("record %d: PMML y = %.17g, sink.Predict η = %.17g", i, got.y, want.Eta)
				}
				if loss == "logistic" {
					if want.Probability == nil || math.Abs(got.prob["1"]-*want.Probability) > 1e-9 ||
						math.Abs(got.prob["0"]+got.prob["1"]-1) > 1e-15 {
						t.Fatalf("record %d: PMML probabilities %v, sink.Predict %v", i, got.prob, want.Probability)
					}
				}
			}
		})
	}
}

// TestPMMLNameCheck checks that checkPMMLNames fails on what it should.
func TestPMMLNameCheck(t *testing.T) {
	const head = `<?xml version="1.0"?>`
	for _, tc := range []struct{ name, doc string }{
		{"not well formed", head + `<PMML xmlns="` + pmml44NS + `" version="4.4"><Header></PMML>`},
		{"unknown element", head + `<PMML xmlns="` + pmml44NS + `" version="4.4"><Heading/></PMML>`},
		{"unknown attribute", head + `<PMML xmlns="` + pmml44NS + `" version="4.4" flavour="x"/>`},
		{"wrong parent", head + `<PMML xmlns="` + pmml44NS + `" version="4.4"><NumericPredictor/></PMML>`},
		{"wrong namespace", head + `<PMML xmlns="http://www.dmg.org/PMML-4_3" version="4.4"/>`},
		{"wrong root", head + `<Header xmlns="` + pmml44NS + `"/>`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if err := checkPMMLNames([]byte(tc.doc)); err == nil {
				t.Errorf("no error for %s", tc.doc)
			}
		})
	}
	if err := checkPMMLNames([]byte(head + `<PMML xmlns="` + pmml44NS + `" version="4.4"><Header description="d"/></PMML>`)); err != nil {
		t.Errorf("a minimal document fails: %v", err)
	}
}
