package online

import (
	"errors"
	"math"
	"testing"
)

// foreign is a Loss the package does not know by type: it embeds a
// built-in loss, so every method is the built-in's, but the learners see
// lossOther and call Deriv through the interface.
type foreign struct{ Loss }

// TestForeignLoss checks that a loss is one type implementing Loss: a
// foreign copy of each built-in loss streams, converges, validates labels
// and scores exactly as the built-in does (the devirtualized derivative is
// the same arithmetic as Deriv), for both learners.
func TestForeignLoss(t *testing.T) {
	for _, tc := range lossSuite {
		for _, lrn := range []string{"saga", "decay"} {
			t.Run(tc.loss.Name()+"/"+lrn, func(t *testing.T) {
				logistic := tc.loss.Domain() == ZeroOne
				p := makeProblem(21, 700, 5, 3, logistic, true)
				var ls [2]*Ladder
				var hs [2]*Holdout
				for k, loss := range []Loss{tc.loss, foreign{tc.loss}} {
					l, err := NewLadder(&Options{Loss: loss, Features: 5, Size: 4, Window: 300, Seed: 3, Learner: lrn})
					if err != nil {
						t.Fatal(err)
					}
					h := NewHoldout(5, 100)
					h.SetLoss(loss)
					for i := range 700 {
						if i%7 == 0 {
							if err := h.Add(p.record(i)); err != nil {
								t.Fatal(err)
							}
						} else {
							feed(t, l, p, i, i+1)
						}
					}
					l.Converge(1e-8, 20)
					ls[k], hs[k] = l, h
				}
				for i := range 4 {
					a, b := ls[0].Model(i), ls[1].Model(i)
					if a.Intercept != b.Intercept || relErr(a.Coef, b.Coef) != 0 {
						t.Errorf("member %d: foreign model differs: %v %v, want %v %v", i, b.Intercept, b.Coef, a.Intercept, a.Coef)
					}
					if ka, kb := ls[0].KKT(i), ls[1].KKT(i); ka != kb && !(math.IsNaN(ka) && math.IsNaN(kb)) {
						t.Errorf("member %d: KKT %v, want %v", i, kb, ka)
					}
				}
				sa, sb := ls[0].Score(hs[0], nil), ls[1].Score(hs[1], nil)
				for i := range sa {
					if sa[i] != sb[i] {
						t.Errorf("score %d: %+v, want %+v", i, sb[i], sa[i])
					}
				}
				pa, pb := ls[0].HoldoutPredictions(1, hs[0], nil), ls[1].HoldoutPredictions(1, hs[1], nil)
				if relErr(pa, pb) != 0 {
					t.Errorf("holdout predictions differ")
				}
				err := ls[1].Add(Record{X: make([]float64, 5), Y: 0.5})
				if got := errors.Is(err, ErrLabel); got != logistic {
					t.Errorf("label 0.5: error %v", err)
				}
			})
		}
	}
}
