package sink

import (
	"encoding/xml"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"lariat/online"
)

// TestDocFromLadder builds documents from real ladder snapshots (a sparse
// logistic model trained by the online package) and checks that the JSON
// document's predictor and the PMML formula both reproduce Model.Eta and
// Ladder.Eta, including missing values.
func TestDocFromLadder(t *testing.T) {
	const d = 6
	for _, loss := range []online.Loss{online.Squared{}, online.Logistic{}} {
		t.Run(loss.Name(), func(t *testing.T) {
			l, err := online.NewLadder(&online.Options{Loss: loss, Features: d, Window: 400, Size: 6, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			// Two relevant features out of six, on different scales.
			r := rand.New(rand.NewPCG(7, 11))
			x := make([]float64, d)
			for range 600 {
				for j := range x {
					x[j] = float64(j+1)*r.NormFloat64() + 10*float64(j)
				}
				eta := 0.8*(x[0]-0)/1 - 0.5*(x[3]-30)/4
				y := eta + 0.3*r.NormFloat64()
				if loss.Name() == "logistic" {
					y = 0
					if r.Float64() < online.Sigmoid(eta) {
						y = 1
					}
				}
				if err := l.Add(online.Record{X: x, Y: y}); err != nil {
					t.Fatal(err)
				}
			}
			l.Converge(1e-6, 200)
			names := make([]string, d)
			for j := range names {
				names[j] = fmt.Sprintf("x%d", j)
			}
			for i := range l.Size() {
				m := l.Model(i)
				doc, err := NewModelDoc(&DocInput{Name: "real", Version: uint64(i + 1), Features: names, Model: &m, Updated: time.Unix(0, 0)})
				if err != nil {
					t.Fatal(err)
				}
				if doc.Nonzero() != l.Nonzero(i) {
					t.Errorf("member %d: doc nonzero %d, ladder %d", i, doc.Nonzero(), l.Nonzero(i))
				}
				b, err := PMML(doc)
				if err != nil {
					t.Fatal(err)
				}
				var p pmmlDoc
				if err := xml.Unmarshal(b, &p); err != nil {
					t.Fatal(err)
				}
				probe := []float64{1.5, math.NaN(), 18, 33, math.NaN(), 47}
				named := map[string]float64{}
				for j, v := range probe {
					if !math.IsNaN(v) {
						named[names[j]] = v
					}
				}
				want := m.Eta(probe)
				docEta, _ := doc.Eta(named)
				pmmlEta, _ := evalPMML(t, &p, named)
				ladderEta := l.Eta(i, probe)
				tol := 1e-9 * max(1, math.Abs(want))
				if math.Abs(docEta-want) > tol || math.Abs(pmmlEta-want) > tol || math.Abs(ladderEta-want) > tol {
					t.Errorf("member %d: Model.Eta %v, doc %v, PMML %v, Ladder.Eta %v", i, want, docEta, pmmlEta, ladderEta)
				}
			}
		})
	}
}
