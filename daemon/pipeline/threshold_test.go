package pipeline

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"lariat/config"
	"lariat/online"
)

// logitStream is a sparse logistic stream: x ~ N(0, I_d), y ~
// Bernoulli(σ(−1 + 1.5x1 − 1.2x2 + 0.8x3)) (a constructed stream, no
// published source; about a third positives).
type logitStream struct{ rng *rand.Rand }

func (s *logitStream) next(x []float64) float64 {
	for j := range x {
		x[j] = s.rng.NormFloat64()
	}
	if s.rng.Float64() < online.Sigmoid(-1+1.5*x[0]-1.2*x[1]+0.8*x[2]) {
		return 1
	}
	return 0
}

// TestThresholdTunedFPR tunes the alert threshold on the held-out ring to
// a target false-positive rate (online.ThresholdForFPR, Fawcett 2006) and
// checks the rate realized on fresh records from the same distribution,
// scored by the same ladder member, against the target within a binomial
// tolerance of 3σ, σ² = f(1−f)(1/n_h + 1/n_f) with n_h the held-out and
// n_f the fresh negatives (the held-out estimate and the fresh measurement
// are independent binomial proportions).
func TestThresholdTunedFPR(t *testing.T) {
	cases := []struct {
		target float64
		seed   uint64
	}{
		{0.01, 41}, {0.05, 42}, {0.05, 43}, {0.2, 44},
	}
	if testing.Short() {
		cases = cases[1:2]
	}
	const d, train, fresh = 6, 20000, 40000
	for _, tc := range cases {
		t.Run(fmt.Sprintf("target=%v/seed=%d", tc.target, tc.seed), func(t *testing.T) {
			m := driftModel("fpr", config.LossLogistic, featureNames(d), 4000)
			m.Holdout.Records = 2000
			m.Threshold = config.Threshold{Mode: config.ThresholdFPR, Value: 0.5, Target: tc.target}
			h := newHarness(t, m)
			s := &logitStream{rng: rand.New(rand.NewPCG(tc.seed, 9))}
			x := make([]float64, d)
			for range train {
				h.feed(x, s.next(x))
			}
			h.p.retune()
			tu := h.tuner()
			cur := h.p.current()
			nh := negatives(h.p.hold.Labels(nil))
			var nf, alarms int
			for range fresh {
				if s.next(x) != 0 {
					continue
				}
				nf++
				if online.Sigmoid(h.p.ladder.Eta(cur, x)) >= tu.value {
					alarms++
				}
			}
			got := float64(alarms) / float64(nf)
			sd := math.Sqrt(tc.target * (1 - tc.target) * (1/float64(nh) + 1/float64(nf)))
			t.Logf("threshold %.4f tuned on %d held-out negatives; realized FPR %.4f on %d fresh negatives (target %.3f, 3σ = %.4f)",
				tu.value, nh, got, nf, tc.target, 3*sd)
			if math.Abs(got-tc.target) > 3*sd {
				t.Errorf("realized FPR %.4f, want %.3f ± %.4f", got, tc.target, 3*sd)
			}
			if rows := h.store.ROC("fpr"); len(rows) < 2 {
				t.Errorf("ROC table has %d rows", len(rows))
			}
		})
	}
}

// TestThresholdTunedPrecision logs the precision realized on fresh records
// by a threshold tuned to a target precision (online.ThresholdForPrecision)
// and checks it within 3σ of the target, σ² = q(1−q)(1/a_h + 1/a_f) with a_h
// and a_f the held-out and fresh alarms.
func TestThresholdTunedPrecision(t *testing.T) {
	const d, train, fresh, target = 6, 20000, 40000, 0.8
	m := driftModel("prec", config.LossLogistic, featureNames(d), 4000)
	m.Holdout.Records = 2000
	m.Threshold = config.Threshold{Mode: config.ThresholdPrecision, Value: 0.5, Target: target}
	h := newHarness(t, m)
	s := &logitStream{rng: rand.New(rand.NewPCG(45, 9))}
	x := make([]float64, d)
	for range train {
		h.feed(x, s.next(x))
	}
	h.p.retune()
	tu := h.tuner()
	cur := h.p.current()
	probs := h.p.ladder.HoldoutPredictions(cur, h.p.hold, nil)
	ah := 0
	for _, p := range probs {
		if p >= tu.value {
			ah++
		}
	}
	var af, tp int
	for range fresh {
		y := s.next(x)
		if online.Sigmoid(h.p.ladder.Eta(cur, x)) >= tu.value {
			af++
			if y == 1 {
				tp++
			}
		}
	}
	got := float64(tp) / float64(af)
	sd := math.Sqrt(target * (1 - target) * (1/float64(ah) + 1/float64(af)))
	t.Logf("threshold %.4f (%d held-out alarms); realized precision %.4f over %d fresh alarms (target %.2f, 3σ = %.4f)",
		tu.value, ah, got, af, target, 3*sd)
	if math.Abs(got-target) > 3*sd {
		t.Errorf("realized precision %.4f, want %.2f ± %.4f", got, target, 3*sd)
	}
}

// TestThresholdModes checks the tuner's modes through the pipeline: fixed keeps the value; a change of mode re-tunes at once; the
// document carries value, mode and target.
func TestThresholdModes(t *testing.T) {
	m := driftModel("modes", config.LossLogistic, featureNames(4), 2000)
	m.Threshold = config.Threshold{Mode: config.ThresholdFixed, Value: 0.7, Target: 0.01}
	h := newHarness(t, m)
	s := &logitStream{rng: rand.New(rand.NewPCG(46, 9))}
	x := make([]float64, 4)
	for range 6000 {
		h.feed(x, s.next(x))
	}
	tu := h.tuner()
	if tu.mode != "fixed" || tu.value != 0.7 || tu.target != 0.7 {
		t.Fatalf("fixed: mode %s value %v target %v, want fixed 0.7 0.7", tu.mode, tu.value, tu.target)
	}
	if err := h.p.SetThreshold(config.ThresholdFPR, 0.1); err != nil {
		t.Fatal(err)
	}
	if tu.value == 0.7 {
		t.Errorf("fpr: value still %v after the change", tu.value)
	}
	doc := h.publish().Doc
	if doc.Threshold == nil || doc.Threshold.Mode != "fpr" || doc.Threshold.Target != 0.1 || doc.Threshold.Value != tu.value {
		t.Errorf("document threshold %+v", doc.Threshold)
	}
	if err := h.p.SetThreshold(config.ThresholdFixed, 0.3); err != nil {
		t.Fatal(err)
	}
	if tu.value != 0.3 {
		t.Errorf("fixed 0.3: value %v", tu.value)
	}
}

// TestThresholdCheck is the validation table of SetThreshold (and of the daemon's SetThresholdTarget).
func TestThresholdCheck(t *testing.T) {
	for _, tc := range []struct {
		mode   string
		target float64
		ok     bool
	}{
		{"fixed", 0.5, true}, {"fixed", 0, false}, {"fixed", 1, false},
		{"fpr", 0.01, true}, {"fpr", 0, false}, {"fpr", 1, false}, {"fpr", 1.5, false}, {"fpr", math.NaN(), false},
		{"precision", 0.9, true}, {"precision", 1, false}, {"precision", -0.1, false}, {"roc", 0.5, false},
	} {
		err := CheckThreshold(tc.mode, tc.target)
		if (err == nil) != tc.ok {
			t.Errorf("CheckThreshold(%q, %v) = %v, want ok %v", tc.mode, tc.target, err, tc.ok)
		}
	}
}
