package config

import (
	"encoding/json"
	"fmt"
	"log/slog"
	"strings"
	"time"

	"go.yaml.in/yaml/v3"
)

// Duration is a [time.Duration] written in YAML as a Go duration string
// such as "30s", "10m" or "1h30m". A bare 0 is also accepted.
type Duration time.Duration

// Std returns d as a [time.Duration].
func (d Duration) Std() time.Duration { return time.Duration(d) }

// String formats d like [time.Duration.String].
func (d Duration) String() string { return time.Duration(d).String() }

// UnmarshalYAML decodes a Go duration string. Numbers other than 0 are
// rejected, since a number without a unit is ambiguous.
func (d *Duration) UnmarshalYAML(n *yaml.Node) error {
	if n.Kind != yaml.ScalarNode {
		return fmt.Errorf("expected a duration such as \"30s\" or \"10m\", got %s", describe(n))
	}
	s := strings.TrimSpace(n.Value)
	if s == "0" {
		*d = 0
		return nil
	}
	if n.ShortTag() == "!!int" || n.ShortTag() == "!!float" {
		return fmt.Errorf("%s has no unit (write a duration such as \"%ss\" or \"%sm\")", s, s, s)
	}
	v, err := time.ParseDuration(s)
	if err != nil {
		return fmt.Errorf("%q is not a duration (write a Go duration such as \"30s\", \"10m\" or \"1h30m\")", n.Value)
	}
	*d = Duration(v)
	return nil
}

// MarshalYAML encodes d as a Go duration string.
func (d Duration) MarshalYAML() (any, error) { return d.String(), nil }

// Secret is a string that never shows itself: String, GoString, LogValue
// and the YAML and JSON encoders all print [redacted] in its place (or
// nothing when it is empty). Convert it with string(s) to use it.
type Secret string

const redacted = "[redacted]"

// String returns "[redacted]", or "" for an empty secret.
func (s Secret) String() string {
	if s == "" {
		return ""
	}
	return redacted
}

// GoString returns the quoted redaction, for %#v.
func (s Secret) GoString() string { return fmt.Sprintf("%q", s.String()) }

// LogValue returns the redaction, for log/slog.
func (s Secret) LogValue() slog.Value { return slog.StringValue(s.String()) }

// MarshalYAML encodes the redaction.
func (s Secret) MarshalYAML() (any, error) { return s.String(), nil }

// MarshalJSON encodes the redaction.
func (s Secret) MarshalJSON() ([]byte, error) { return json.Marshal(s.String()) }

// MarshalText encodes the redaction (used by encoders that prefer text).
func (s Secret) MarshalText() ([]byte, error) { return []byte(s.String()), nil }
