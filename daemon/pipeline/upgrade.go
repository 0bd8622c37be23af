package pipeline

import (
	"fmt"

	"lariat/config"
	"lariat/online"
)

// A state saved with learner saga (set, or unset in a version of lariat
// whose default was saga) restored with learner.kind unset or saga: the
// fingerprints that match, and the SAGA ladder taken over by a gram
// ladder under an unset kind (see Restore).

// fingerprintKinds returns the kinds of learner.kind a state may have been
// saved under to be restored under m besides m's own: with learner.kind
// unset or saga, the other of the two (a version of lariat whose default
// was saga saved its models with the kind unset, and an unset kind now
// means gram for the squared loss: restoreModel takes a SAGA ladder over
// into a gram ladder then, and keeps it under an explicit saga); with the
// kind unset or gram, the other of the two (the same learner for the
// squared loss, the only loss gram runs; the ladder's own learner is
// checked by upgrade).
func fingerprintKinds(m *config.Model) []string {
	switch m.Learner.Kind {
	case "":
		return []string{config.LearnerSAGA, config.LearnerGram}
	case config.LearnerSAGA, config.LearnerGram:
		return []string{""}
	}
	return nil
}

// fingerprintOK reports whether fp is the fingerprint of m, or of m with
// one of the learner kinds of fingerprintKinds.
func fingerprintOK(fp uint64, m *config.Model) bool {
	if fp == fingerprint(m) {
		return true
	}
	for _, k := range fingerprintKinds(m) {
		alt := *m
		alt.Learner.Kind = k
		if fp == fingerprint(&alt) {
			return true
		}
	}
	return false
}

// upgrade returns the restored ladder lad as the model runs it: a SAGA
// ladder of the squared loss under an unset learner.kind (saved by a
// version whose default was saga, or under an explicit saga since
// removed) is taken over by a gram ladder with the same window and grid
// (online.GramFrom); any other ladder must be of the learner the model
// runs.
func (p *Pipeline) upgrade(lad *online.Ladder) (*online.Ladder, error) {
	want := p.ladder.Learner()
	switch {
	case lad.Learner() == want:
		return lad, nil
	case want == config.LearnerGram && lad.Learner() == config.LearnerSAGA && p.cfg.Learner.Kind == "":
		g, err := online.GramFrom(lad)
		if err != nil {
			return nil, fmt.Errorf("%w: ladder: %v", ErrState, err)
		}
		p.upgraded = true
		return g, nil
	}
	return nil, fmt.Errorf("%w: a %s ladder, the model runs %s", ErrState, lad.Learner(), want)
}

// Upgraded reports whether Restore took a SAGA ladder over into a gram
// ladder (see Restore).
func (p *Pipeline) Upgraded() bool { return p.upgraded }
