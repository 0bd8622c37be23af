package main

import (
	"strings"
	"testing"
)

// TestFitFlags: a numeric flag of lariat fit given as 0 is taken as 0, never
// as "not given": --lambda 0 is the unpenalized fit, and where 0 is not a
// valid value (--mix of elastic-net, --tol, --max-epochs) it is an error
// rather than the default. Leaving --lambda out still chooses λ.
func TestFitFlags(t *testing.T) {
	base := []string{"fit", "--input", "../../../testdata/diabetes.csv", "--label", "progression"}
	for _, tc := range []struct {
		name    string
		args    []string
		wantOut string // in stdout when the command succeeds
		wantErr string // in the error otherwise
	}{
		{"lambda 0", []string{"--lambda", "0"}, "squared loss, unpenalized (λ = 0)", ""},
		{"lambda 0 ridge", []string{"--lambda", "0", "--penalty", "ridge"}, "unpenalized (λ = 0)", ""},
		{"no lambda", nil, "rule one-se on 88 held-out rows", ""},
		{"lambda given", []string{"--lambda", "4.5"}, "lasso (α = 1), λ = 4.5,", ""},
		{"mix 0", []string{"--penalty", "elastic-net", "--mix", "0"}, "", "elastic-net mix 0 must be in (0, 1)"},
		{"mix on ridge", []string{"--penalty", "ridge", "--mix", "0"}, "", "--mix applies only to elastic-net, not ridge"},
		{"mix default", []string{"--penalty", "elastic-net", "--lambda", "1"}, "elastic-net (α = 0.5)", ""},
		{"tol 0", []string{"--tol", "0"}, "", "--tol 0: the KKT tolerance must be > 0"},
		{"max-epochs 0", []string{"--max-epochs", "0"}, "", "--max-epochs 0: the epoch budget must be >= 1"},
		{"lambda 0 with ladder", []string{"--lambda", "0", "--ladder"}, "", "cannot be combined with --lambda"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out, _, err := run(t, append(base, tc.args...)...)
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
					t.Errorf("err = %v, want %q", err, tc.wantErr)
				}
				return
			}
			if err != nil || !strings.Contains(out, tc.wantOut) {
				t.Errorf("err = %v, output:\n%s\nwant %q", err, out, tc.wantOut)
			}
		})
	}
}

// TestDemoFlagsZero: lariat demo refuses a numeric flag given as 0 where 0
// has no meaning, before it starts anything, instead of running with the
// default.
func TestDemoFlagsZero(t *testing.T) {
	for _, tc := range []struct{ flag, want string }{
		{"--duration", "--duration 0s: give a positive duration"},
		{"--every", "--every 0s: the narration period must be positive"},
		{"--rate", "--rate 0: the plant's records per second must be positive"},
		{"--seed", "--seed 0: the plant's seed must be >= 1"},
	} {
		t.Run(tc.flag, func(t *testing.T) {
			_, _, err := run(t, "demo", tc.flag, "0", "--data", t.TempDir())
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want %q", err, tc.want)
			}
		})
	}
}
