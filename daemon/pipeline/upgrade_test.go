package pipeline

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"lariat/config"
	"lariat/online"
)

// TestRestoreSAGAAsGram: a squared-loss model saved with learner saga (an
// explicit learner.kind: saga, and the layout of a version whose default
// was saga: kind unset, SAGA ladder) and restored with learner.kind unset
// continues with a gram ladder whose window holds the same records, whose
// members equal, to 1e-12, a gram ladder with the member's λ fixed fed
// those records and converged (KKT 1e-12), and whose other state (held-out
// ring, chooser, counters, version, position, drift watch, guard) is the
// saved one, byte for byte; it then applies records and publishes models
// at the KKT tolerance. An explicit saga keeps saga bit for bit, and a gram
// state is refused under an explicit saga. Source: the gram learner's
// definition (README, "What is exact and what is approximate"), no
// external source; the members are checked against online's own solver.
func TestRestoreSAGAAsGram(t *testing.T) {
	const window, d = 1500, 6
	m := driftModel("upgrade", config.LossSquared, featureNames(d), window)
	m.Learner.Kind = config.LearnerSAGA
	h := newHarness(t, m)
	s := &sparseStream{rng: rand.New(rand.NewPCG(7, 9))}
	x := make([]float64, d)
	var train []online.Record
	for range 4000 {
		y := s.next(x)
		h.feed(x, y)
		if !h.p.step.HeldOut {
			train = append(train, online.Record{X: slices.Clone(x), Y: y, W: 1})
		}
	}
	h.publish()
	saga := h.p.cfg
	unset := *saga
	unset.Learner.Kind = ""
	explicit, err := h.p.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	h.p.cfg = &unset // the fingerprint a version whose default was saga wrote
	older, err := h.p.MarshalBinary()
	h.p.cfg = saga
	if err != nil {
		t.Fatal(err)
	}
	for name, state := range map[string][]byte{"explicit saga": explicit, "unset, older version": older} {
		t.Run(name, func(t *testing.T) {
			q, err := Restore(Options{Model: &unset}, state)
			if err != nil {
				t.Fatal(err)
			}
			l := q.Ladder()
			if l.Learner() != config.LearnerGram || !q.Upgraded() || l.Len() != window || l.Seen() != h.p.Ladder().Seen() {
				t.Fatalf("restored %s ladder (upgraded %v) of %d records, %d seen; want gram of %d, %d",
					l.Learner(), q.Upgraded(), l.Len(), l.Seen(), window, h.p.Ladder().Seen())
			}
			if a, b := otherState(t, h.p), otherState(t, q); !bytes.Equal(a, b) {
				t.Fatal("the state beside the ladder changed")
			}
			for i := range l.Size() {
				ref, err := online.NewLadder(&online.Options{Features: d, Window: window, Penalty: &online.Penalty{Mix: 1},
					Lambda: l.Lambda(i), Learner: config.LearnerGram})
				if err != nil {
					t.Fatal(err)
				}
				for _, r := range train[len(train)-window:] {
					if err := ref.Add(r); err != nil {
						t.Fatal(err)
					}
				}
				ref.Converge(1e-9, 1) // to min(1e-9/1000, the learner's target) = 1e-12
				a, b := l.Model(i), ref.Model(0)
				var num, den float64
				for j := range a.Standardized {
					num += (a.Standardized[j] - b.Standardized[j]) * (a.Standardized[j] - b.Standardized[j])
					den += b.Standardized[j] * b.Standardized[j]
				}
				if dist := math.Sqrt(num / max(den, 1)); !(dist <= 1e-12) || !(math.Abs(a.Intercept-b.Intercept) <= 1e-12*max(1, math.Abs(b.Intercept))) {
					t.Errorf("member %d (λ %g): %g from the gram ladder fed the window, intercept %v against %v",
						i, l.Lambda(i), dist, a.Intercept, b.Intercept)
				}
			}
			g := newHarness(t, unset)
			g.p, g.now = q, h.now
			for range 1500 {
				g.feed(x, s.next(x))
			}
			snap := g.publish()
			if snap == nil || snap.Doc.KKT == nil || !(*snap.Doc.KKT <= online.DefaultKKT) || q.Ladder().Len() != window || q.Ladder().Learner() != config.LearnerGram {
				t.Fatalf("after 1500 more records: snapshot %v, window %d, learner %s", snap != nil, q.Ladder().Len(), q.Ladder().Learner())
			}
		})
	}
	// An explicit saga keeps saga, bit for bit, from either state.
	for _, state := range [][]byte{explicit, older} {
		q, err := Restore(Options{Model: saga}, state)
		if err != nil {
			t.Fatal(err)
		}
		again, err := q.MarshalBinary()
		if err != nil || q.Ladder().Learner() != config.LearnerSAGA || q.Upgraded() || !bytes.Equal(again, explicit) {
			t.Fatalf("under an explicit saga: learner %s, upgraded %v, same bytes %v (%v)", q.Ladder().Learner(), q.Upgraded(), bytes.Equal(again, explicit), err)
		}
	}
	// A gram state (kind unset) cannot be restored under an explicit saga.
	q, err := Restore(Options{Model: &unset}, explicit)
	if err != nil {
		t.Fatal(err)
	}
	gram, err := q.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Restore(Options{Model: saga}, gram); !errors.Is(err, ErrState) {
		t.Fatalf("gram state under learner saga: %v, want ErrState", err)
	}
}

// otherState returns p's saved state but the ladder and the fingerprint:
// the held-out ring, the chooser, the counters, the drift watch, the tuner,
// the guard and the newest record time.
func otherState(t *testing.T, p *Pipeline) []byte {
	t.Helper()
	e := newEnc()
	hb, err := p.hold.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	cb, err := p.chooser.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	e.bytes(hb)
	e.bytes(cb)
	p.marshalCounters(e)
	if err := p.watch.marshal(e); err != nil {
		t.Fatal(err)
	}
	p.marshalTuner(e)
	p.marshalTail(e)
	return e.Bytes()
}

// TestRestoreGramUnsetOrExplicit: learner.kind unset runs gram for the
// squared loss, so a state saved with the kind unset is restored under an
// explicit gram, and one saved under an explicit gram with the kind unset,
// with the ladder bit for bit (the same learner: writing down the default
// must not start the model fresh). Source: the learner's default
// (config.Learner.EffectiveKind), no external source.
func TestRestoreGramUnsetOrExplicit(t *testing.T) {
	const window, d = 500, 4
	m := driftModel("explicit", config.LossSquared, featureNames(d), window)
	m.Learner.Kind = ""
	explicit := m
	explicit.Learner.Kind = config.LearnerGram
	for _, c := range []struct {
		name     string
		from, to *config.Model
	}{{"unset to gram", &m, &explicit}, {"gram to unset", &explicit, &m}} {
		t.Run(c.name, func(t *testing.T) {
			h := newHarness(t, *c.from)
			s := &sparseStream{rng: rand.New(rand.NewPCG(3, 4))}
			x := make([]float64, d)
			for range 1200 {
				h.feed(x, s.next(x))
			}
			state, err := h.p.MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			q, err := Restore(Options{Model: c.to}, state)
			if err != nil {
				t.Fatalf("restore: %v", err)
			}
			a, err := h.p.Ladder().MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			b, err := q.Ladder().MarshalBinary()
			if err != nil {
				t.Fatal(err)
			}
			if q.Ladder().Learner() != config.LearnerGram || q.Upgraded() || !bytes.Equal(a, b) {
				t.Fatalf("restored a %s ladder (upgraded %v), same bytes %v", q.Ladder().Learner(), q.Upgraded(), bytes.Equal(a, b))
			}
		})
	}
}
