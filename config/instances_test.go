package config

import "testing"

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
