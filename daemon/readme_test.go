package daemon

import (
	"os"
	"regexp"
	"slices"
	"strings"
	"testing"

	"lariat/daemon/record"
)

// TestReadmeRejectTable keeps the README's table of reject reasons true:
// every reason the decoder, the pipeline and the daemon can give
// (record.Reasons() and the daemon's own) has a row with an example, and
// every row names a reason that exists.
func TestReadmeRejectTable(t *testing.T) {
	b, err := os.ReadFile("../README.md")
	if err != nil {
		t.Fatal(err)
	}
	text := string(b)
	i := strings.Index(text, "#### Rejected records")
	if i < 0 {
		t.Fatal(`README has no "#### Rejected records" section`)
	}
	section := text[i:]
	if j := strings.Index(section[5:], "\n#"); j >= 0 {
		section = section[:j+5]
	}
	row := regexp.MustCompile("(?m)^\\| `([a-z_]+)` \\| ([^|]+) \\| ([^|]+) \\|$")
	var listed []string
	for _, m := range row.FindAllStringSubmatch(section, -1) {
		listed = append(listed, m[1])
		if strings.TrimSpace(m[2]) == "" || strings.TrimSpace(m[3]) == "" {
			t.Errorf("row %s has no example or explanation", m[1])
		}
	}
	want := append(record.Reasons(), reasonQueueFull, reasonNoModel, reasonNotReady, reasonKey, reasonInstances)
	for _, r := range want {
		if !slices.Contains(listed, r) {
			t.Errorf("reason %q has no row in the README's reject table", r)
		}
	}
	for _, r := range listed {
		if !slices.Contains(want, r) {
			t.Errorf("README's reject table lists %q, which no code gives", r)
		}
	}
}
