package config

import (
	"fmt"
	"strings"
	"testing"
)

func TestInstanceKey(t *testing.T) {
	for _, c := range []struct {
		subject string
		token   int
		want    string
	}{
		{"plant.p07.trip", 2, "p07"},
		{"plant.p07.trip", 1, "plant"},
		{"plant.p07.trip", 3, "trip"},
		{"plant.p07.trip", 4, ""},
		{"plant..trip", 2, ""},
		{"p07", 1, "p07"},
	} {
		if got := InstanceKey(c.subject, c.token); got != c.want {
			t.Errorf("InstanceKey(%q, %d) = %q, want %q", c.subject, c.token, got, c.want)
		}
	}
}

func TestValidKey(t *testing.T) {
	long := string(make([]byte, 65))
	for _, c := range []struct {
		key  string
		want bool
	}{
		{"p07", true},
		{"P-7_a", true},
		{"7", true},
		{"", false},
		{"-p", false},
		{"_p", false},
		{"p.7", false},
		{"p 7", false},
		{"pümpe", false},
		{long, false},
		{"a123456789012345678901234567890123456789012345678901234567890123", true}, // 64 bytes
	} {
		if got := ValidKey(c.key); got != c.want {
			t.Errorf("ValidKey(%q) = %v, want %v", c.key, got, c.want)
		}
	}
}

func TestTemplateConfig(t *testing.T) {
	c, err := Parse("t.yaml", []byte("models:\n  - name: trips\n    subject: plant.*.trip\n    instances: {key_token: 2, max: 50, idle: 2m}\n"))
	if err != nil {
		t.Fatal(err)
	}
	m := c.Models[0]
	if !m.Template() || m.Instances.Max != 50 || m.Instances.Idle.Std().Minutes() != 2 {
		t.Errorf("instances = %+v, template %v", m.Instances, m.Template())
	}
	if c.Models[0].Instances.KeyToken != 2 {
		t.Errorf("key_token %d", m.Instances.KeyToken)
	}
	d := DefaultModel()
	if d.Template() {
		t.Error("the default model is a template")
	}
}

// TestSharedPartitions: instances.partitions and instances.takeover are
// validated, and partitions > 1 need checkpoints in the bucket and a
// stream. Source: the rules of README "Running more than one".
func TestSharedPartitions(t *testing.T) {
	const base = "models:\n  - name: trips\n    subject: plant.*.trip\n    instances: {key_token: 2, partitions: %d, takeover: %s}\n"
	for _, c := range []struct {
		name, extra string
		parts       int
		takeover    string
		want        string // "" = valid
	}{
		{"default one partition", "", 1, "5s", ""},
		{"shared with the bucket", "checkpoint: {store: bucket}\n", 8, "5s", ""},
		{"shared without the bucket", "", 8, "5s", "need checkpoint.store: bucket"},
		{"shared with core intake", "checkpoint: {store: bucket}\nintake: {mode: core}\n", 8, "5s", "need intake.mode auto or durable"},
		{"zero partitions", "", 0, "5s", "instances.partitions"},
		{"too many partitions", "checkpoint: {store: bucket}\n", 1025, "5s", "instances.partitions"},
		{"takeover too short", "", 1, "500ms", "instances.takeover"},
		{"takeover too long", "", 1, "6m", "instances.takeover"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse("t.yaml", fmt.Appendf(nil, c.extra+base, c.parts, c.takeover))
			switch {
			case c.want == "" && err != nil:
				t.Errorf("unexpected error: %v", err)
			case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
				t.Errorf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

func TestKeyWildcard(t *testing.T) {
	for _, c := range []struct {
		subject string
		token   int
		want    int
	}{
		{"plant.*.trip", 2, 1},
		{"site.*.pump.*.trip", 4, 2},
		{"site.*.pump.*.trip", 2, 1},
		{"plant.*.trip", 0, 0},
	} {
		m := Model{Subject: c.subject, Instances: Instances{KeyToken: c.token}}
		if got := m.KeyWildcard(); got != c.want {
			t.Errorf("KeyWildcard(%q, %d) = %d, want %d", c.subject, c.token, got, c.want)
		}
	}
}
