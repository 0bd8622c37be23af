package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
	"time"
)

// TestRunDemo runs the demo for a few seconds on random ports and checks the
// banner and the summary.
func TestRunDemo(t *testing.T) {
	if testing.Short() {
		t.Skip("demo: a few seconds")
	}
	var out bytes.Buffer
	err := runDemo(context.Background(), demoOptions{
		Duration: 4 * time.Second, Rate: 400, FaultAfter: -1, Out: &out,
		Data: t.TempDir(), NATSListen: "127.0.0.1:-1", HTTPListen: "127.0.0.1:0",
	})
	if err != nil {
		t.Fatalf("runDemo: %v\n%s", err, out.String())
	}
	s := out.String()
	for _, want := range []string{"INVENTED", "lariat pull pump-trip --from http://127.0.0.1:", "pump-trip", "bearing-temp", "version"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
}

func TestSubjectFor(t *testing.T) {
	for _, tc := range []struct{ pattern, want string }{
		{"plant.demo.pump.trip", "plant.demo.pump.trip"},
		{"plant.*.trip", "plant.p3.trip"},
		{"plant.pump.>", "plant.pump.p3"},
	} {
		if got := subjectFor(tc.pattern)("p3"); got != tc.want {
			t.Errorf("%s: %s, want %s", tc.pattern, got, tc.want)
		}
	}
}
