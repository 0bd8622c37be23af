package config

import (
	"fmt"
	"math"
	"strings"
	"unicode"

	"go.yaml.in/yaml/v3"
)

// Guard sets the plausibility checks a decoded record passes before it
// reaches its model. A record that fails one is rejected with a reason of
// its own (out_of_range for a configured bound, implausible for the
// standard-deviation guard), counted, and never touches the model.
type Guard struct {
	// SD rejects a value (of a channel or of a squared-loss label) that is
	// more than SD standard deviations from the mean of that channel's
	// recent values, once the channel is warm. The mean and standard
	// deviation are exponentially weighted over the channel's accepted
	// values with a half-life of window.records values, so they follow a
	// drifting process. 0 turns the guard off; otherwise at least 3.
	// Default 1000: by Chebyshev's inequality at most 1/SD² = 10⁻⁶ of any
	// distribution with a variance lies that far out, and for a normal
	// channel the chance is below 10⁻¹⁰⁰⁰⁰⁰.
	SD float64 `yaml:"sd"`
	// Warm is the number of accepted values of a channel (or labels)
	// before the SD guard checks it, 2 to 10000000. Default 100.
	Warm int `yaml:"warm"`
	// Persist is how many values of a channel in a row, on the same side,
	// the SD guard rejects before it takes them for a new level and
	// accepts the next ones (a real step change must not lock the model
	// out of a new regime), 0 to 1000000; 0 never accepts them. Default 10.
	Persist int `yaml:"persist"`
	// Bounds are fixed limits per named channel: a value outside is
	// rejected (reason out_of_range), however often it comes. A channel
	// with bounds is not checked by the SD guard. Default none.
	Bounds []Bound `yaml:"bounds"`
	// Label bounds the label of a squared-loss model the same way
	// (logistic labels are 0 or 1 already). Default none.
	Label Range `yaml:"label"`
}

// Bound is the range of plausible values of one named channel.
type Bound struct {
	// Feature is the channel's name; when the model lists its features,
	// one of them. Required.
	Feature string `yaml:"feature"`
	// Min is the smallest plausible value (inclusive); unset: no minimum.
	Min Limit `yaml:"min"`
	// Max is the largest plausible value (inclusive); unset: no maximum.
	Max Limit `yaml:"max"`
}

// Range is an optional minimum and maximum.
type Range struct {
	// Min is the smallest plausible value (inclusive); unset: no minimum.
	Min Limit `yaml:"min"`
	// Max is the largest plausible value (inclusive); unset: no maximum.
	Max Limit `yaml:"max"`
}

// Limit is an optional number: Set is false when the key is absent.
type Limit struct {
	// V is the number, valid when Set.
	V float64
	// Set reports whether the limit was given.
	Set bool
}

// Lo returns the limit as a lower bound: V, or −Inf when unset.
func (l Limit) Lo() float64 {
	if !l.Set {
		return math.Inf(-1)
	}
	return l.V
}

// Hi returns the limit as an upper bound: V, or +Inf when unset.
func (l Limit) Hi() float64 {
	if !l.Set {
		return math.Inf(1)
	}
	return l.V
}

// UnmarshalYAML decodes a number.
func (l *Limit) UnmarshalYAML(n *yaml.Node) error {
	var f float64
	if n.Kind != yaml.ScalarNode || (n.ShortTag() != "!!int" && n.ShortTag() != "!!float") || n.Decode(&f) != nil {
		return fmt.Errorf("expected a number, got %s", describe(n))
	}
	*l = Limit{V: f, Set: true}
	return nil
}

// MarshalYAML encodes the number, or null when unset.
func (l Limit) MarshalYAML() (any, error) {
	if !l.Set {
		return nil, nil
	}
	return l.V, nil
}

// Defaults of Guard.
const (
	DefaultGuardSD      = 1000
	DefaultGuardWarm    = 100
	DefaultGuardPersist = 10
)

func defaultGuard() Guard {
	return Guard{SD: DefaultGuardSD, Warm: DefaultGuardWarm, Persist: DefaultGuardPersist}
}

// validateGuard checks the guard section of a model.
func (m *Model) validateGuard(k *checker, p string) {
	g := &m.Guard
	p += ".guard"
	if g.SD != 0 && !(g.SD >= 3) || math.IsInf(g.SD, 0) {
		k.add(p+".sd", "%v is out of range (allowed: 0 = off, or finite >= 3)", g.SD)
	}
	k.intRange(p+".warm", g.Warm, 2, maxRecords)
	k.intRange(p+".persist", g.Persist, 0, 1_000_000)
	fixed := make(map[string]bool, len(m.Features))
	for _, f := range m.Features {
		fixed[f] = true
	}
	seen := map[string]int{}
	for i, b := range g.Bounds {
		bp := fmt.Sprintf("%s.bounds[%d]", p, i)
		switch f := b.Feature; {
		case strings.TrimSpace(f) == "":
			k.add(bp+".feature", "is required (allowed: a channel name)")
		case strings.IndexFunc(f, unicode.IsControl) >= 0:
			k.add(bp+".feature", "%q contains a control character", f)
		case len(f) > maxFeatureName:
			k.add(bp+".feature", "is longer than %d bytes", maxFeatureName)
		case len(m.Features) > 0 && !fixed[f]:
			k.add(bp+".feature", "%q is not one of features (allowed: the names listed in features)", f)
		default:
			if j, dup := seen[f]; dup {
				k.add(bp+".feature", "%q is already bounded by bounds[%d]", f, j)
			}
			seen[f] = i
		}
		if !b.Min.Set && !b.Max.Set && !k.reported(bp+".min") && !k.reported(bp+".max") {
			k.add(bp, "sets neither min nor max (allowed: min, max or both)")
		}
		checkRange(k, bp, Range{Min: b.Min, Max: b.Max})
	}
	if g.Label.Min.Set || g.Label.Max.Set {
		if m.Logistic() {
			k.add(p+".label", "is only for squared-loss models (a logistic label is 0 or 1)")
		} else {
			checkRange(k, p+".label", g.Label)
		}
	}
}

// checkRange checks that the limits of r are finite and min <= max.
func checkRange(k *checker, p string, r Range) {
	for _, l := range []struct {
		key string
		lim Limit
	}{{"min", r.Min}, {"max", r.Max}} {
		if l.lim.Set && (math.IsNaN(l.lim.V) || math.IsInf(l.lim.V, 0)) {
			k.add(p+"."+l.key, "%v is out of range (allowed: a finite number)", l.lim.V)
		}
	}
	if r.Min.Set && r.Max.Set && r.Min.V > r.Max.V {
		k.add(p+".min", "%v is above max %v (allowed: min <= max)", r.Min.V, r.Max.V)
	}
}

// reported reports whether decoding already found a problem at path.
func (k *checker) reported(path string) bool { return k.src != nil && k.src.bad[path] }
