//go:build soak

package pipeline

import (
	"fmt"
	"testing"

	"lariat/config"
)

// TestDriftFalseAlarmsSoak measures the false-alarm rates of
// TestDriftFalseAlarms over 1M stationary records per run and more seeds
// (go test -tags soak -run TestDriftFalseAlarmsSoak ./daemon/pipeline/, a few
// minutes). It asserts the same per-100k bounds on the totals.
func TestDriftFalseAlarmsSoak(t *testing.T) {
	const n = 1000000
	var runs []faRun
	for seed := uint64(101); seed <= 103; seed++ {
		runs = append(runs,
			faRun{"sea", config.DriftADWIN, config.LossLogistic, seed, 3, 4000},
			faRun{"sea", config.DriftPageHinkley, config.LossLogistic, seed, 3, 4000},
			faRun{"friedman1", config.DriftADWIN, config.LossSquared, seed, 10, 4000},
		)
	}
	for _, r := range runs {
		t.Run(fmt.Sprintf("%s/%s/seed=%d", r.stream, r.perf, r.seed), func(t *testing.T) {
			st := r.count(t, n)
			for i, bound := range []int{2, 2, 5} {
				if st.detected[i] > bound*n/100000 {
					t.Errorf("kind %d: %d alerts per %d records, want at most %d", i, st.detected[i], n, bound*n/100000)
				}
			}
		})
	}
}
