package record

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"
)

// TestRFC3339MatchesTime checks parseRFC3339 against time.Parse (Go 1.26)
// on random valid date-times, including offsets, fractions of every length
// and the ends of the year range.
func TestRFC3339MatchesTime(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	cases := []string{
		"0000-01-01T00:00:00Z", "9999-12-31T23:59:59.999999999-23:59", "0000-01-01T00:00:00+23:59",
		"2000-02-29T12:00:00Z", "1900-02-28T00:00:00Z", "1970-01-01T00:00:00.0001Z", "1969-12-31T23:59:59.999Z",
	}
	for range 20000 {
		s := fmt.Sprintf("%04d-%02d-%02dT%02d:%02d:%02d", rng.IntN(10000), 1+rng.IntN(12), 1+rng.IntN(31),
			rng.IntN(24), rng.IntN(60), rng.IntN(60))
		if n := rng.IntN(13); n > 0 {
			s += "." + fmt.Sprintf("%012d", rng.Int64N(1e12))[:n]
		}
		if rng.IntN(3) == 0 {
			s += "Z"
		} else {
			s += fmt.Sprintf("%c%02d:%02d", "+-"[rng.IntN(2)], rng.IntN(24), rng.IntN(60))
		}
		cases = append(cases, s)
	}
	for _, s := range cases {
		want, err := time.Parse(time.RFC3339Nano, s)
		got, ok := parseRFC3339([]byte(s))
		if ok != (err == nil) || ok && got != want.UnixMilli() {
			t.Errorf("%s: got %d, %v; time.Parse: %d, %v", s, got, ok, want.UnixMilli(), err)
		}
	}
}

func TestRFC3339Rejects(t *testing.T) {
	for _, s := range []string{
		"", "2026-03-04T05:06:07", "2026-03-04T05:06:07.Z", "2026-03-04T05:06:07+01", "2026-03-04T05:06:07+0100",
		"2026-03-04T05:06:07+24:00", "2026-03-04T05:06:07+01:60", "2026-13-04T05:06:07Z", "2026-00-04T05:06:07Z",
		"2026-04-31T05:06:07Z", "2026-03-04T24:06:07Z", "2026-03-04T05:60:07Z", "2026-03-04T05:06:60Z",
		"2026-03-04T05:06:07ZZ", "-026-03-04T05:06:07Z", "2026-03-04T05:06:07.1.2Z", "2026/03/04T05:06:07Z",
		"2026-03-04T05:06:07 Z", "2026-03-04T05:06:0aZ",
	} {
		if ms, ok := parseRFC3339([]byte(s)); ok {
			t.Errorf("%q accepted as %d", s, ms)
		}
	}
}

// TestAppendRFC3339 checks the writer against time.Time.Format and the
// parser over the whole four-digit year range.
func TestAppendRFC3339(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	cases := []int64{minRFC3339, maxRFC3339, 0, -1, 1, 951782400000}
	for range 20000 {
		cases = append(cases, minRFC3339+rng.Int64N(maxRFC3339-minRFC3339+1))
	}
	for _, ms := range cases {
		got := string(appendRFC3339(nil, ms))
		want := `"` + time.UnixMilli(ms).UTC().Format("2006-01-02T15:04:05.000Z07:00") + `"`
		if got != want {
			t.Fatalf("%d: %s, want %s", ms, got, want)
		}
		if back, ok := parseRFC3339([]byte(got[1 : len(got)-1])); !ok || back != ms {
			t.Fatalf("%s parsed back as %d, %v", got, back, ok)
		}
	}
}
