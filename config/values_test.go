package config

import (
	"strings"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"
)

func TestDurationUnmarshal(t *testing.T) {
	tests := []struct {
		in      string
		want    time.Duration
		wantErr string
	}{
		{"30s", 30 * time.Second, ""},
		{"10m", 10 * time.Minute, ""},
		{"1h30m", 90 * time.Minute, ""},
		{"250ms", 250 * time.Millisecond, ""},
		{"0", 0, ""},
		{"0s", 0, ""},
		{"-1m", -time.Minute, ""}, // the type accepts it; validation rejects it per field
		{`"45s"`, 45 * time.Second, ""},
		{"30", 0, `30 has no unit (write a duration such as "30s" or "30m")`},
		{"1.5", 0, "1.5 has no unit"},
		{"ten", 0, `"ten" is not a duration (write a Go duration such as "30s", "10m" or "1h30m")`},
		{"10 m", 0, `"10 m" is not a duration`},
		{"{a: 1}", 0, "expected a duration such as \"30s\" or \"10m\", got a mapping"},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			var d Duration
			err := yaml.Unmarshal([]byte(tt.in), &d)
			if tt.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
					t.Errorf("got %v, want %q", err, tt.wantErr)
				}
				return
			}
			if err != nil || d.Std() != tt.want {
				t.Errorf("got %v, %v; want %v", d, err, tt.want)
			}
		})
	}
}

func TestDurationMarshal(t *testing.T) {
	out, err := yaml.Marshal(struct{ D Duration }{Duration(90 * time.Second)})
	if err != nil || string(out) != "d: 1m30s\n" {
		t.Errorf("got %q, %v", out, err)
	}
}

func TestSecretString(t *testing.T) {
	if Secret("").String() != "" || Secret("x").String() != redacted {
		t.Error("Secret.String")
	}
	out, _ := yaml.Marshal(struct{ S Secret }{"hunter2"})
	if strings.Contains(string(out), "hunter2") {
		t.Errorf("yaml: %s", out)
	}
}

func TestCheckSubject(t *testing.T) {
	tests := []struct {
		s         string
		wildcards bool
		want      string // substring of the problem; "" = valid
	}{
		{"plant.a", false, ""},
		{"a", false, ""},
		{"plant.*.flow", true, ""},
		{"plant.>", true, ""},
		{">", true, ""},
		{"plant.Ünïcode-ok_1", false, ""},
		{"", true, "is empty"},
		{"plant..a", true, "empty token"},
		{".plant", true, "empty token"},
		{"plant.", true, "empty token"},
		{"plant a", true, "whitespace"},
		{"plant\ta", true, "whitespace"},
		{"plant.*", false, "wildcard"},
		{"plant.>", false, "wildcard"},
		{"plant.>.a", true, "> before the last token"},
		{"plant.a*", true, "mixing"},
		{"plant.a>b", true, "mixing"},
	}
	for _, tt := range tests {
		got := checkSubject(tt.s, tt.wildcards)
		if (tt.want == "") != (got == "") || !strings.Contains(got, tt.want) {
			t.Errorf("checkSubject(%q, %v) = %q, want %q", tt.s, tt.wildcards, got, tt.want)
		}
	}
}

func TestOverlap(t *testing.T) {
	tests := []struct {
		a, b string
		want bool
	}{
		{"a.b", "a.b", true},
		{"a.b", "a.c", false},
		{"a.*", "a.b", true},
		{"a.*", "a.b.c", false},
		{"a.>", "a.b.c", true},
		{"a.>", "a", false},
		{">", "lariat.model.x", true},
		{"*.model.x", "lariat.>", true},
		{"plant.x", "lariat.>", false},
		{"a.b.c", "a.b", false},
		{"*.*", "a.>", true},
	}
	for _, tt := range tests {
		if got := overlap(tt.a, tt.b); got != tt.want {
			t.Errorf("overlap(%q, %q) = %v", tt.a, tt.b, got)
		}
		if got := overlap(tt.b, tt.a); got != tt.want {
			t.Errorf("overlap(%q, %q) = %v (not symmetric)", tt.b, tt.a, got)
		}
	}
}

func TestCheckListen(t *testing.T) {
	tests := []struct {
		addr     string
		loopback bool
		want     string
	}{
		{"127.0.0.1:4222", true, ""},
		{"127.0.0.1:-1", true, ""},
		{"127.0.0.1:0", true, ""},
		{"[::1]:4222", true, ""},
		{"localhost:4222", true, ""},
		{"10.0.0.1:4222", true, "loopback"},
		{":4222", true, "loopback"},
		{"127.0.0.1:65536", true, "out of range"},
		{"127.0.0.1:-2", true, "out of range"},
		{":8080", false, ""},
		{"0.0.0.0:8080", false, ""},
		{"host.example:8080", false, ""},
		{"127.0.0.1:-1", false, "out of range"},
		{"127.0.0.1:http", false, "out of range"},
		{"8080", false, "not host:port"},
		{"", false, "not host:port"},
	}
	for _, tt := range tests {
		got := checkListen(tt.addr, tt.loopback)
		if (tt.want == "") != (got == "") || !strings.Contains(got, tt.want) {
			t.Errorf("checkListen(%q, %v) = %q, want %q", tt.addr, tt.loopback, got, tt.want)
		}
	}
}

func TestCheckNATSURL(t *testing.T) {
	tests := []struct{ u, want string }{
		{"nats://h:4222", ""},
		{"tls://h", ""},
		{"NATS://h", ""},
		{"nats://u:p@h:1", ""},
		{"http://h:1", `scheme "http"`},
		{"h:4222", "not a URL"},
		{"nats://", "not a URL"},
		{"nats://h:0", "out of range"},
		{"", "empty entry"},
	}
	for _, tt := range tests {
		got := checkNATSURL(tt.u)
		if (tt.want == "") != (got == "") || !strings.Contains(got, tt.want) {
			t.Errorf("checkNATSURL(%q) = %q, want %q", tt.u, got, tt.want)
		}
	}
}

func TestEditDistance(t *testing.T) {
	tests := []struct {
		a, b string
		want int
	}{{"", "", 0}, {"abc", "", 3}, {"learnr", "learner", 1}, {"flor", "floor", 1}, {"kitten", "sitting", 3}}
	for _, tt := range tests {
		if got := editDistance(tt.a, tt.b); got != tt.want {
			t.Errorf("editDistance(%q, %q) = %d, want %d", tt.a, tt.b, got, tt.want)
		}
	}
}
