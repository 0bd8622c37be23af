package sink

import (
	"encoding/xml"
	"errors"
	"io"
	"math"
	"net/http/httptest"
	"regexp"
	"strings"
	"testing"
	"time"

	"lariat/online"
)

// hostile is a feature name that must reach the page escaped.
const hostile = "<script>alert(1)</script>"

// statusDoc builds a document of loss for features names with standardized
// coefficients theta (unit scale), on testScores' 5-member ladder.
func statusDoc(t testing.TB, name, loss string, names []string, theta []float64) *ModelDoc {
	t.Helper()
	d := len(names)
	mean, std := make([]float64, d), make([]float64, d)
	for j := range std {
		std[j] = 1
	}
	in := &DocInput{
		Name: name, Version: 42, Features: names, Model: testModel(loss, theta, mean, std, 0.1),
		Scores: testScores(loss), Holdout: 500, Updated: time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC),
	}
	if loss == "logistic" {
		in.Threshold = &Threshold{Value: 0.7, Mode: "fpr", Target: 0.05}
	}
	doc, err := NewModelDoc(in)
	if err != nil {
		t.Fatal(err)
	}
	// A U-shaped held-out loss: the minimum at index 3 (λ*), the one-SE
	// rule at index 2.
	for i := range doc.Ladder {
		doc.Ladder[i].Loss = Metric(0.7 + 0.04*float64((i-3)*(i-3)))
		doc.Ladder[i].SE = 0.05
	}
	return doc
}

// statusPath returns a 5-member path ending at theta (member i scaled by
// i/4), with testScores' λ values.
func statusPath(theta []float64) ([]float64, [][]float64) {
	var lambdas []float64
	var coefs [][]float64
	for i := range 5 {
		lambdas = append(lambdas, 0.4/float64(int(1)<<i))
		c := make([]float64, len(theta))
		for j, v := range theta {
			c[j] = v * float64(i) / 4
		}
		coefs = append(coefs, c)
	}
	return lambdas, coefs
}

// statusStore returns a store with a squared model "lin" and a logistic
// model "clf", with paths and loss histories; withExtras adds a ROC table
// and alerts of every kind.
func statusStore(t testing.TB, withExtras bool) *Store {
	t.Helper()
	s := NewStore()
	t0 := time.Date(2026, 3, 4, 0, 0, 0, 0, time.UTC)
	linNames := []string{"temperature", "pressure", hostile, "humidity", "flow_rate"}
	linTheta := []float64{0.8, -1.6, 0.3, 0, -0.05}
	clfNames := []string{"amount", "age_days", "country_risk", "velocity"}
	clfTheta := []float64{1.2, -0.4, 0.9, 0}
	for v := range 30 {
		for _, m := range []struct {
			name, loss string
			names      []string
			theta      []float64
		}{{"lin", "squared", linNames, linTheta}, {"clf", "logistic", clfNames, clfTheta}} {
			d := statusDoc(t, m.name, m.loss, m.names, m.theta)
			d.Version = uint64(v + 1)
			d.Holdout.Loss = Metric(0.7 + 0.05*math.Sin(float64(v)/3))
			if err := s.SetModel(d); err != nil {
				t.Fatal(err)
			}
			l, c := statusPath(m.theta)
			s.SetPath(m.name, l, c)
		}
	}
	if withExtras {
		var roc []online.ROCPoint
		for i := range 21 {
			th := 1 - float64(i)/20
			fpr := math.Pow(1-th, 2)
			roc = append(roc, online.ROCPoint{Threshold: th, TPR: math.Sqrt(1 - th), FPR: fpr, Precision: 0.5 + th/2})
		}
		s.SetROC("clf", roc)
		for i := range 12 {
			s.AddAlert(Alert{Model: "lin", Kind: []AlertKind{KindPerformance, KindData, KindModel}[i%3], Severity: SeverityWarning,
				Seq: uint64(i), Time: t0.Add(time.Duration(i) * time.Minute), Message: "drift " + string(rune('A'+i))})
		}
		for i := range 50 {
			p := 0.9
			s.AddAlert(Alert{Model: "clf", Kind: KindPrediction, Severity: SeverityInfo, Seq: uint64(100 + i),
				Time: t0.Add(time.Duration(i) * time.Second), Probability: &p, Message: "p = 0.9 ≥ 0.7 #" + string(rune('a'+i%26))})
		}
		s.AddAlert(Alert{Model: "clf", Kind: KindData, Severity: SeverityCritical, Seq: 7, Time: t0,
			Message: "PSI of amount is 0.4 > 0.25"})
	}
	return s
}

// renderStatus returns the status page of s.
func renderStatus(t *testing.T, s *Store) string {
	t.Helper()
	h := NewHandler(HandlerOptions{Store: s, Ready: func() error { return nil }})
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, httptest.NewRequest("GET", "/", nil))
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, rec.Body)
	}
	return rec.Body.String()
}

var svgRE = regexp.MustCompile(`(?s)<svg\b.*?</svg>`)

// checkSVGs parses every SVG of page as XML and returns their classes.
func checkSVGs(t *testing.T, page string) []string {
	t.Helper()
	var classes []string
	for _, svg := range svgRE.FindAllString(page, -1) {
		dec := xml.NewDecoder(strings.NewReader(svg))
		dec.Strict = true
		first := true
		for {
			tok, err := dec.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("SVG is not well-formed XML: %v\n%s", err, svg)
			}
			if se, ok := tok.(xml.StartElement); ok && first {
				first = false
				for _, a := range se.Attr {
					if a.Name.Local == "class" {
						classes = append(classes, a.Value)
					}
				}
			}
		}
	}
	return classes
}

func TestStatusPageCharts(t *testing.T) {
	for _, tc := range []struct {
		name       string
		withExtras bool
		want       []string // SVG classes in page order
	}{
		{"bare", false, []string{"chart bars", "chart path", "chart loss", "chart spark", "chart bars", "chart path", "chart loss", "chart spark"}},
		{"roc and alerts", true, []string{"chart bars", "chart path", "chart loss", "chart spark", "chart roc", "chart bars", "chart path", "chart loss", "chart spark"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			page := renderStatus(t, statusStore(t, tc.withExtras))
			got := checkSVGs(t, page)
			if strings.Join(got, ",") != strings.Join(tc.want, ",") {
				t.Errorf("SVGs %q, want %q", got, tc.want)
			}
			for _, want := range []string{`id="model-clf"`, `id="model-lin"`, "λ*", ">1-SE<", ">min<"} {
				if !strings.Contains(page, want) {
					t.Errorf("page lacks %s", want)
				}
			}
			if tc.withExtras {
				for _, want := range []string{
					"Prediction alerts: 50", "PSI of amount is 0.4 &gt; 0.25", "drift L", "drift C",
					"0.7 (fpr 0.05)", "at 0.7: TPR",
				} {
					if !strings.Contains(page, want) {
						t.Errorf("page lacks %s", want)
					}
				}
				// Latest 10 drift alerts only (A and B are older), latest 3 predictions.
				if strings.Contains(page, "drift A") || strings.Contains(page, "drift B") {
					t.Error("more than 10 drift alerts listed")
				}
				if n := strings.Count(page, "p = 0.9"); n != 3 {
					t.Errorf("%d prediction alerts listed, want 3", n)
				}
			} else if !strings.Contains(page, "no ROC table yet") || !strings.Contains(page, "no drift alerts") {
				t.Error("page lacks the empty ROC and alert notes")
			}
		})
	}
}

func TestStatusPageEscapes(t *testing.T) {
	page := renderStatus(t, statusStore(t, true))
	if strings.Contains(page, "<script") {
		t.Error("hostile feature name reached the page unescaped")
	}
	if !strings.Contains(page, "&lt;script&gt;") {
		t.Error("hostile feature name not shown escaped")
	}
}

var barRE = regexp.MustCompile(`<rect [^>]*><title>([^<]*) = ([^<]*)</title></rect>`)

func TestStatusBarsSorted(t *testing.T) {
	page := renderStatus(t, statusStore(t, false))
	lin := page[strings.Index(page, `id="model-lin"`):]
	lin = lin[:strings.Index(lin, "</svg>")]
	var names []string
	for _, m := range barRE.FindAllStringSubmatch(lin, -1) {
		names = append(names, m[1])
	}
	want := []string{"pressure", "temperature", "&lt;script&gt;alert(1)&lt;/script&gt;", "flow_rate"}
	if strings.Join(names, "|") != strings.Join(want, "|") {
		t.Errorf("bars %q, want %q (by |θ|, zero left out)", names, want)
	}
}

func TestSelections(t *testing.T) {
	ladder := []LadderEntry{
		{Index: 0, Lambda: 1, Loss: 1.0, SE: 0.1},
		{Index: 1, Lambda: 0.5, Loss: 0.75, SE: 0.1},
		{Index: 2, Lambda: 0.25, Loss: 0.7, SE: 0.1},
		{Index: 3, Lambda: 0.125, Loss: Metric(math.NaN()), SE: 0.1},
	}
	if mi, se := selections(ladder); mi != 2 || se != 1 {
		t.Errorf("selections = %d, %d; want 2, 1", mi, se)
	}
	if mi, se := selections(nil); mi != -1 || se != -1 {
		t.Errorf("selections(nil) = %d, %d", mi, se)
	}
}

func TestStorePredictionFlood(t *testing.T) {
	s := NewStore()
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	s.AddAlert(Alert{Model: "m", Kind: KindPerformance, Seq: 1, Time: t0, Message: "loss rose"})
	for i := range 500 {
		s.AddAlert(Alert{Model: "m", Kind: KindPrediction, Seq: uint64(2 + i), Time: t0.Add(time.Duration(i+1) * time.Second)})
	}
	all := s.Alerts("m")
	if len(all) != 1+PredictionAlertsKept || all[0].Message != "loss rose" || all[len(all)-1].Seq != 501 {
		t.Fatalf("after a flood: %d alerts, first %+v", len(all), all[0])
	}
	drift, n := s.alertsOf("m", false)
	if len(drift) != 1 || n != 500 {
		t.Errorf("drift %d, prediction count %d", len(drift), n)
	}
	if merged := s.Alerts(""); len(merged) != len(all) || merged[0].Kind != KindPerformance {
		t.Errorf("merged alerts %d, first %v", len(merged), merged[0].Kind)
	}
}

func TestStoreLossHistory(t *testing.T) {
	s := NewStore()
	for v := range LossHistoryKept + 5 {
		d := testDoc(t, "m", "squared", uint64(v+1))
		if err := s.SetModel(d); err != nil {
			t.Fatal(err)
		}
	}
	h := s.LossHistory("m")
	if len(h) != LossHistoryKept || h[0].Version != 6 || h[len(h)-1].Version != LossHistoryKept+5 {
		t.Errorf("history of %d points, versions %d..%d", len(h), h[0].Version, h[len(h)-1].Version)
	}
	if s.LossHistory("nope") != nil || s.Path("nope") != nil {
		t.Error("history or path of an unknown model")
	}
}
