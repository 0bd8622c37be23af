package online

import (
	"errors"
	"fmt"
	"math"
)

// ErrRule reports an unknown λ selection rule name.
var ErrRule = errors.New("online: unknown selection rule")

// Rule is how Choose picks a ladder member from its held-out scores.
type Rule int

const (
	// RuleMin picks the member with the lowest held-out loss.
	RuleMin Rule = iota
	// RuleOneSE picks the largest λ whose held-out loss is within one
	// standard error of the lowest: the sparsest model that is not
	// measurably worse (Hastie, Tibshirani & Friedman 2009, ESL §7.10).
	RuleOneSE
)

// String returns the rule's configuration name: "min" or "one-se".
func (r Rule) String() string {
	switch r {
	case RuleMin:
		return "min"
	case RuleOneSE:
		return "one-se"
	}
	return fmt.Sprintf("Rule(%d)", int(r))
}

// ParseRule returns the rule named s: "min" or "one-se". Any other name is
// an error wrapping ErrRule.
func ParseRule(s string) (Rule, error) {
	switch s {
	case "min":
		return RuleMin, nil
	case "one-se":
		return RuleOneSE, nil
	}
	return 0, fmt.Errorf("%w %q (allowed: min, one-se)", ErrRule, s)
}

// better reports whether a is preferred to b at equal merit: the larger λ,
// then the earlier position.
func better(scores []Score, a, b int) bool {
	if scores[a].Lambda != scores[b].Lambda {
		return scores[a].Lambda > scores[b].Lambda
	}
	return a < b
}

// Choose returns the position in scores of the member picked by rule, or −1
// when scores is empty or holds no finite loss. RuleMin takes the lowest
// loss; RuleOneSE takes the member with the largest λ whose loss is at most
// the lowest loss plus the SE of that lowest member. Ties in either rule go
// to the larger λ, then to the earlier position, so with scores in ladder
// order (index 0 = λ_max) the sparser member wins. An unknown rule panics.
func Choose(scores []Score, rule Rule) int {
	best := -1
	for i, s := range scores {
		if math.IsNaN(s.Loss) || math.IsInf(s.Loss, 0) {
			continue
		}
		if best < 0 || s.Loss < scores[best].Loss || (s.Loss == scores[best].Loss && better(scores, i, best)) {
			best = i
		}
	}
	switch rule {
	case RuleMin:
		return best
	case RuleOneSE:
	default:
		panic(fmt.Sprintf("online: unknown rule %d", int(rule)))
	}
	if best < 0 {
		return -1
	}
	limit := scores[best].Loss
	if se := scores[best].SE; se > 0 && !math.IsInf(se, 1) {
		limit += se
	}
	pick := best
	for i, s := range scores {
		if !math.IsInf(s.Loss, -1) && s.Loss <= limit && better(scores, i, pick) {
			pick = i
		}
	}
	return pick
}

// Chooser applies Choose with hysteresis so that the published model does
// not flap: after the first Update, which adopts its choice at once, a
// different choice replaces the current one only when it wins two
// consecutive Updates. The zero value is ready to use with RuleMin. Scores
// must come in the same order on every Update (as Ladder.Score returns them).
type Chooser struct {
	// Rule is the selection rule applied on every Update.
	Rule Rule

	started bool
	current int
	pending int // choice that won the last Update but is not current; -1 none
}

// Update chooses among scores and returns the current choice and whether it
// changed. An Update whose scores yield no choice (see Choose) leaves the
// state untouched and reports no change.
func (c *Chooser) Update(scores []Score) (index int, changed bool) {
	pick := Choose(scores, c.Rule)
	switch {
	case pick < 0:
		return c.Current(), false
	case !c.started:
		c.started, c.current, c.pending = true, pick, -1
		return pick, true
	case pick == c.current:
		c.pending = -1
	case pick == c.pending:
		c.current, c.pending = pick, -1
		return pick, true
	default:
		c.pending = pick
	}
	return c.current, false
}

// Current returns the current choice, or −1 before the first Update that
// made one.
func (c *Chooser) Current() int {
	if !c.started {
		return -1
	}
	return c.current
}

// Shift re-indexes the choices after the ladder's members moved (Ladder.Extend):
// the member at index i is now at i+by on a ladder of size members. A
// current choice that falls off the ladder is clamped to its nearest end, a
// pending one is dropped.
func (c *Chooser) Shift(by, size int) {
	if !c.started {
		return
	}
	c.current = max(0, min(size-1, c.current+by))
	if c.pending >= 0 {
		if c.pending += by; c.pending < 0 || c.pending >= size {
			c.pending = -1
		}
	}
}

// Reset forgets the current and pending choices; the next Update adopts its
// choice at once.
func (c *Chooser) Reset() {
	c.started, c.current, c.pending = false, 0, -1
}
