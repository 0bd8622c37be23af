package online

import (
	"errors"
	"fmt"
	"math"
	"testing"
)

// chooseLadder builds scores in ladder order (λ halving from 1) with the
// given losses and standard errors.
func chooseLadder(loss, se []float64) []Score {
	s := make([]Score, len(loss))
	lambda := 1.0
	for i := range s {
		s[i] = Score{Index: i, Lambda: lambda, Loss: loss[i], SE: se[i]}
		lambda /= 2
	}
	return s
}

// TestChoose checks the min and one-standard-error rules (Hastie, Tibshirani
// & Friedman 2009, ESL §7.10: the most parsimonious model whose error is no
// more than one SE above that of the best model) on hand-made ladders.
func TestChoose(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name     string
		loss, se []float64
		min, one int
	}{
		{"u-shape", []float64{5, 3, 2, 2.5, 3}, []float64{1, 1, 0.4, 1, 1}, 2, 2},
		{"one-se moves to a larger λ", []float64{5, 2.25, 2, 2.1}, []float64{1, 1, 0.3, 1}, 2, 1},
		{"bound is inclusive", []float64{5, 2.5, 2, 2.1}, []float64{1, 1, 0.5, 1}, 2, 1},
		{"uses the SE of the minimum, not its own", []float64{5, 2.6, 2, 2.1}, []float64{1, 5, 0.5, 1}, 2, 2},
		{"min ties go to the larger λ", []float64{4, 2, 3, 2}, []float64{0, 0, 0, 0}, 1, 1},
		{"all equal", []float64{1, 1, 1}, []float64{0, 0, 0}, 0, 0},
		{"flat within SE picks λ_max", []float64{1.1, 1.05, 1}, []float64{0.2, 0.2, 0.2}, 2, 0},
		{"NaN skipped", []float64{nan, 3, 2}, []float64{0, 1, 0.5}, 2, 2},
		{"Inf skipped", []float64{math.Inf(-1), 3, 2}, []float64{0, 1, 2}, 2, 1},
		{"single", []float64{7}, []float64{1}, 0, 0},
		{"empty", nil, nil, -1, -1},
		{"all NaN", []float64{nan, nan}, []float64{0, 0}, -1, -1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := chooseLadder(tc.loss, tc.se)
			if got := Choose(s, RuleMin); got != tc.min {
				t.Errorf("min = %d, want %d", got, tc.min)
			}
			if got := Choose(s, RuleOneSE); got != tc.one {
				t.Errorf("one-se = %d, want %d", got, tc.one)
			}
		})
	}
}

// TestChooseByLambda checks that "largest λ" is read from Score.Lambda, not
// from the position, when the two disagree. Source: the one-SE rule picks
// the largest λ, the most regularized model, within one standard error of
// the best (Hastie, Tibshirani & Friedman, Elements of Statistical Learning,
// 2nd ed., 2009, §7.10); a position on the ladder is only bookkeeping.
func TestChooseByLambda(t *testing.T) {
	s := []Score{
		{Index: 2, Lambda: 0.25, Loss: 2, SE: 1},
		{Index: 0, Lambda: 1, Loss: 2.5},
		{Index: 1, Lambda: 0.5, Loss: 2.2},
	}
	if got := Choose(s, RuleOneSE); got != 1 {
		t.Fatalf("one-se = %d, want position 1 (λ = 1)", got)
	}
}

func TestParseRule(t *testing.T) {
	tests := []struct {
		in   string
		want Rule
		err  bool
	}{
		{"min", RuleMin, false},
		{"one-se", RuleOneSE, false},
		{"1se", 0, true},
		{"", 0, true},
		{"MIN", 0, true},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			got, err := ParseRule(tc.in)
			if (err != nil) != tc.err || got != tc.want {
				t.Fatalf("ParseRule(%q) = %v, %v", tc.in, got, err)
			}
			if err != nil && !errors.Is(err, ErrRule) {
				t.Fatalf("error %v does not wrap ErrRule", err)
			}
			if err == nil && got.String() != tc.in {
				t.Fatalf("String() = %q, want %q", got.String(), tc.in)
			}
		})
	}
}

// TestChooserHysteresis checks the hysteresis rule (README.md, "How λ is
// chosen and how to read alerts": a new choice must win two consecutive
// retunes before λ* moves; the two-win rule is this product's choice,
// hysteresis itself is common practice, no single source): each letter is the
// winner of one Update.
func TestChooserHysteresis(t *testing.T) {
	tests := []struct {
		winners string
		current string // Current after each Update
		changed string // '+' where Update reported a change
	}{
		{"A", "A", "+"},
		{"AA", "AA", "+."},
		{"AB", "AA", "+."},
		{"ABB", "AAB", "+.+"},
		{"ABC", "AAA", "+.."},
		{"ABCC", "AAAC", "+..+"},
		{"ABAB", "AAAA", "+..."},
		{"ABBA", "AABB", "+.+."},
		{"ABBAA", "AABBA", "+.+.+"},
		{"ABBBCBB", "AABBBBB", "+.+...."},
		{"A-B-B", "AAAAB", "+...+"}, // '-' is an Update without scores
	}
	for _, tc := range tests {
		t.Run(tc.winners, func(t *testing.T) {
			var c Chooser
			c.Rule = RuleOneSE
			if c.Current() != -1 {
				t.Fatalf("Current before any Update = %d, want -1", c.Current())
			}
			for i, w := range tc.winners {
				var s []Score
				if w != '-' {
					s = chooseWinner(int(w - 'A'))
				}
				idx, changed := c.Update(s)
				want := int(tc.current[i] - 'A')
				if idx != want || c.Current() != want || changed != (tc.changed[i] == '+') {
					t.Fatalf("update %d (%c): got %d changed=%v, Current %d; want %d changed=%v",
						i, w, idx, changed, c.Current(), want, tc.changed[i] == '+')
				}
			}
		})
	}
}

// chooseWinner returns a 4-member ladder where member k has the unique
// lowest loss and a zero SE, so either rule picks k.
func chooseWinner(k int) []Score {
	loss := []float64{1, 1, 1, 1}
	loss[k] = 0
	return chooseLadder(loss, []float64{0, 0, 0, 0})
}

func TestChooserReset(t *testing.T) {
	var c Chooser
	c.Update(chooseWinner(1))
	c.Reset()
	if c.Current() != -1 {
		t.Fatalf("Current after Reset = %d", c.Current())
	}
	if idx, changed := c.Update(chooseWinner(3)); idx != 3 || !changed {
		t.Fatalf("first Update after Reset = %d, %v; want 3, true", idx, changed)
	}
}

func ExampleChoose() {
	// Held-out loss ± SE for a 5-member ladder, λ_max first.
	scores := []Score{
		{Index: 0, Lambda: 1.0, Loss: 0.90, SE: 0.05},
		{Index: 1, Lambda: 0.3, Loss: 0.52, SE: 0.04},
		{Index: 2, Lambda: 0.1, Loss: 0.47, SE: 0.03},
		{Index: 3, Lambda: 0.03, Loss: 0.45, SE: 0.03},
		{Index: 4, Lambda: 0.01, Loss: 0.46, SE: 0.03},
	}
	fmt.Println("min:", Choose(scores, RuleMin))
	fmt.Println("one-se:", Choose(scores, RuleOneSE))
	// Output:
	// min: 3
	// one-se: 2
}
