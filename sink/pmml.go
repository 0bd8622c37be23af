package sink

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"io"
	"strconv"
	"time"
)

// PMML 4.4 (Data Mining Group, "PMML 4.4 — Regression", value from memory):
// a RegressionModel evaluates y = intercept + Σ coefficient·x^exponent per
// RegressionTable. With functionName "regression" and normalizationMethod
// "none" that is the prediction. With functionName "classification" and
// two target categories, normalizationMethod "logit" turns the first
// table's value y₁ into p₁ = 1/(1 + e^−y₁) and the second (reference) table
// gets p₂ = 1 − p₁; the reference table has intercept 0 and no predictors.
// Missing inputs are replaced by the window mean (MiningField
// missingValueTreatment "asMean"), matching Model.Eta.

const (
	pmmlNamespace = "http://www.dmg.org/PMML-4_4"
	pmmlVersion   = "4.4"
)

type pmmlDoc struct {
	XMLName        xml.Name            `xml:"http://www.dmg.org/PMML-4_4 PMML"`
	Version        string              `xml:"version,attr"`
	Header         pmmlHeader          `xml:"Header"`
	DataDictionary pmmlDataDictionary  `xml:"DataDictionary"`
	Model          pmmlRegressionModel `xml:"RegressionModel"`
}

type pmmlHeader struct {
	Description  string          `xml:"description,attr"`
	ModelVersion string          `xml:"modelVersion,attr"`
	Application  pmmlApplication `xml:"Application"`
	Timestamp    string          `xml:"Timestamp"`
}

type pmmlApplication struct {
	Name string `xml:"name,attr"`
}

type pmmlDataDictionary struct {
	NumberOfFields int             `xml:"numberOfFields,attr"`
	Fields         []pmmlDataField `xml:"DataField"`
}

type pmmlDataField struct {
	Name     string      `xml:"name,attr"`
	OpType   string      `xml:"optype,attr"`
	DataType string      `xml:"dataType,attr"`
	Values   []pmmlValue `xml:"Value,omitempty"`
}

type pmmlValue struct {
	Value string `xml:"value,attr"`
}

type pmmlRegressionModel struct {
	ModelName           string             `xml:"modelName,attr"`
	FunctionName        string             `xml:"functionName,attr"`
	AlgorithmName       string             `xml:"algorithmName,attr"`
	NormalizationMethod string             `xml:"normalizationMethod,attr"`
	MiningSchema        pmmlMiningSchema   `xml:"MiningSchema"`
	Output              pmmlOutput         `xml:"Output"`
	Tables              []pmmlRegressionTb `xml:"RegressionTable"`
}

type pmmlMiningSchema struct {
	Fields []pmmlMiningField `xml:"MiningField"`
}

type pmmlMiningField struct {
	Name                    string `xml:"name,attr"`
	UsageType               string `xml:"usageType,attr"`
	MissingValueReplacement string `xml:"missingValueReplacement,attr,omitempty"`
	MissingValueTreatment   string `xml:"missingValueTreatment,attr,omitempty"`
}

type pmmlOutput struct {
	Fields []pmmlOutputField `xml:"OutputField"`
}

type pmmlOutputField struct {
	Name     string `xml:"name,attr"`
	OpType   string `xml:"optype,attr"`
	DataType string `xml:"dataType,attr"`
	Feature  string `xml:"feature,attr"`
	Value    string `xml:"value,attr,omitempty"`
}

type pmmlRegressionTb struct {
	Intercept      string              `xml:"intercept,attr"`
	TargetCategory string              `xml:"targetCategory,attr,omitempty"`
	Predictors     []pmmlNumericPredic `xml:"NumericPredictor"`
}

type pmmlNumericPredic struct {
	Name        string `xml:"name,attr"`
	Exponent    int    `xml:"exponent,attr"`
	Coefficient string `xml:"coefficient,attr"`
}

// pmmlFloat formats a number in the shortest form that parses back to the
// same float64, a valid xs:double lexical form.
func pmmlFloat(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// targetName returns "y", or "y_", "y__", … if a feature already has it.
func targetName(features []string) string {
	name := "y"
	for taken := true; taken; {
		taken = false
		for _, f := range features {
			if f == name {
				name += "_"
				taken = true
				break
			}
		}
	}
	return name
}

// buildPMML maps doc onto the PMML structure.
func buildPMML(doc *ModelDoc) *pmmlDoc {
	target := targetName(doc.Features)
	p := &pmmlDoc{
		Version: pmmlVersion,
		Header: pmmlHeader{
			Description:  fmt.Sprintf("lariat model %s, %s loss, %s penalty", doc.Model, doc.Loss, doc.Penalty.Kind),
			ModelVersion: strconv.FormatUint(doc.Version, 10),
			Application:  pmmlApplication{Name: "lariat"},
			Timestamp:    doc.Updated.UTC().Format(time.RFC3339Nano),
		},
	}
	for _, f := range doc.Features {
		p.DataDictionary.Fields = append(p.DataDictionary.Fields, pmmlDataField{Name: f, OpType: "continuous", DataType: "double"})
	}
	m := &p.Model
	m.ModelName = doc.Model
	m.AlgorithmName = doc.Penalty.Kind + " regression"
	table := pmmlRegressionTb{Intercept: pmmlFloat(doc.Intercept)}
	for _, f := range doc.Features {
		c, ok := doc.Coefficients[f]
		if !ok {
			continue
		}
		table.Predictors = append(table.Predictors, pmmlNumericPredic{Name: f, Exponent: 1, Coefficient: pmmlFloat(c)})
		m.MiningSchema.Fields = append(m.MiningSchema.Fields, pmmlMiningField{
			Name: f, UsageType: "active",
			MissingValueReplacement: pmmlFloat(doc.Scale[f].Mean), MissingValueTreatment: "asMean",
		})
	}
	m.MiningSchema.Fields = append(m.MiningSchema.Fields, pmmlMiningField{Name: target, UsageType: "target"})
	p.DataDictionary.Fields = append(p.DataDictionary.Fields, setFunction(m, table, target, doc.Logistic()))
	p.DataDictionary.NumberOfFields = len(p.DataDictionary.Fields)
	return p
}

// WritePMML writes doc as a PMML 4.4 RegressionModel document: functionName
// "regression" for the squared loss, "classification" with
// normalizationMethod "logit" and RegressionTables for categories 1 and 0
// for the logistic loss. The DataDictionary lists every feature and the
// target "y" (renamed "y_" if a feature is called y); the MiningSchema and
// the NumericPredictors list the features with a nonzero raw coefficient.
func WritePMML(w io.Writer, doc *ModelDoc) error {
	if _, err := io.WriteString(w, xml.Header); err != nil {
		return err
	}
	enc := xml.NewEncoder(w)
	enc.Indent("", "  ")
	if err := enc.Encode(buildPMML(doc)); err != nil {
		return fmt.Errorf("sink: encoding PMML of %s: %w", doc.Model, err)
	}
	if err := enc.Close(); err != nil {
		return err
	}
	_, err := io.WriteString(w, "\n")
	return err
}

// PMML returns doc as a PMML 4.4 document (see WritePMML).
func PMML(doc *ModelDoc) ([]byte, error) {
	var b bytes.Buffer
	if err := WritePMML(&b, doc); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// setFunction sets the function, normalization, tables and outputs of m for
// the loss and returns the target's DataField.
func setFunction(m *pmmlRegressionModel, table pmmlRegressionTb, target string, logistic bool) pmmlDataField {
	if !logistic {
		m.FunctionName, m.NormalizationMethod = "regression", "none"
		m.Tables = []pmmlRegressionTb{table}
		m.Output.Fields = []pmmlOutputField{
			{Name: "predicted_" + target, OpType: "continuous", DataType: "double", Feature: "predictedValue"},
		}
		return pmmlDataField{Name: target, OpType: "continuous", DataType: "double"}
	}
	m.FunctionName, m.NormalizationMethod = "classification", "logit"
	table.TargetCategory = "1"
	m.Tables = []pmmlRegressionTb{table, {Intercept: "0", TargetCategory: "0"}}
	m.Output.Fields = []pmmlOutputField{
		{Name: "probability_1", OpType: "continuous", DataType: "double", Feature: "probability", Value: "1"},
		{Name: "predicted_" + target, OpType: "categorical", DataType: "integer", Feature: "predictedValue"},
	}
	return pmmlDataField{Name: target, OpType: "categorical", DataType: "integer", Values: []pmmlValue{{"0"}, {"1"}}}
}
