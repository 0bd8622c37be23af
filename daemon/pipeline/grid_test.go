package pipeline

import (
	"math"
	"math/rand/v2"
	"testing"

	"lariat/config"
	"lariat/online"
)

// TestPipelineExtendsRidge streams a problem whose best ridge λ lies below
// the df-anchored grid (8 features, 2 of them informative, thousands of
// records: the least-squares fit is hard to beat) through a ridge model
// with rule min. Every retune that moves the grid (Step.Extended) must keep
// the model in use: the chosen member's λ is the same before and after,
// the last scores follow their members (a score's λ is its member's) and
// the members the move created are unscored (NaN) until the next retune.
// The published document says how the grid is anchored and how far it was
// extended. Source: the rule of online.Ladder.Extend (README, "How λ is
// chosen"), no external source.
func TestPipelineExtendsRidge(t *testing.T) {
	m := driftModel("ridge", config.LossSquared, featureNames(8), 2000)
	m.Penalty, m.Retune.Rule = config.PenaltyRidge, "min"
	m.Retune.Every = math.MaxInt32 // retuned below, every 250 records, as Apply would
	m.Drift.Performance = config.DriftOff
	h := newHarness(t, m)
	s := &sparseStream{rng: rand.New(rand.NewPCG(5, 6))}
	x := make([]float64, 8)
	moves, kept := 0, 0
	for i := range 8000 {
		h.feed(x, s.next(x))
		if (i+1)%250 != 0 {
			continue
		}
		l := h.p.ladder
		K := l.Size()
		old := make([]online.Model, K)
		for j := range K {
			old[j] = l.Model(j)
		}
		before := h.p.current()
		st := h.p.Retune()
		k := st.Extended
		if k == 0 {
			continue
		}
		moves++
		for j := range K {
			if o := j + k; o >= 0 && o < K && !sameCoef(l.Model(j), old[o]) {
				t.Fatalf("move by %d: member %d is not the old member %d", k, j, o)
			}
		}
		if !st.Moved && before >= 0 {
			kept++
			if got := l.Lambda(h.p.current()); got != old[before].Lambda {
				t.Fatalf("move by %d: chosen λ %g became %g", k, old[before].Lambda, got)
			}
		}
		for j, sc := range h.p.scores {
			fresh := (k > 0 && j >= K-k) || (k < 0 && j < -k)
			if sc.Index != j || sc.Lambda != l.Lambda(j) || fresh != math.IsNaN(sc.Loss) {
				t.Fatalf("move by %d: score %d = %+v, member λ %g, fresh %v", k, j, sc, l.Lambda(j), fresh)
			}
		}
	}
	snap := h.publish()
	if snap == nil {
		t.Fatal("nothing published")
	}
	g := snap.Doc.Grid
	if moves == 0 || kept == 0 || g == nil || g.Anchor != online.AnchorDF || g.Extended == 0 || g.Rank != 8 {
		t.Fatalf("%d moves (%d keeping the choice), grid %+v; want moves and an extended df grid of rank 8", moves, kept, g)
	}
	t.Logf("%d moves (%d keeping the choice); grid %+v; chosen member %d, λ %g", moves, kept, *g, snap.Doc.LambdaIndex, snap.Doc.Penalty.Lambda)
}

// sameCoef reports whether a and b have bit-identical coefficients.
func sameCoef(a, b online.Model) bool {
	if math.Float64bits(a.StdIntercept) != math.Float64bits(b.StdIntercept) {
		return false
	}
	for j := range a.Standardized {
		if math.Float64bits(a.Standardized[j]) != math.Float64bits(b.Standardized[j]) {
			return false
		}
	}
	return true
}
