package daemon

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"
)

func TestNewLogger(t *testing.T) {
	cases := []struct {
		level, format string
		json, fail    bool
		debug         bool
	}{
		{"", "", true, false, false}, // auto on a buffer: not a terminal
		{"info", "auto", true, false, false},
		{"debug", "json", true, false, true},
		{"warn", "text", false, false, false},
		{"loud", "text", false, true, false},
		{"info", "xml", false, true, false},
	}
	for _, tc := range cases {
		t.Run(tc.level+"/"+tc.format, func(t *testing.T) {
			var buf bytes.Buffer
			log, err := NewLogger(&buf, tc.level, tc.format)
			if tc.fail {
				if err == nil {
					t.Fatal("no error")
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			log.Debug("dbg")
			log.Warn("hello", "k", 1)
			out := buf.String()
			if got := strings.Contains(out, "dbg"); got != tc.debug {
				t.Errorf("debug line present %v, want %v: %s", got, tc.debug, out)
			}
			lines := strings.Split(strings.TrimSpace(out), "\n")
			last := lines[len(lines)-1]
			isJSON := json.Valid([]byte(last))
			if isJSON != tc.json {
				t.Errorf("JSON %v, want %v: %s", isJSON, tc.json, last)
			}
		})
	}
}
