package pipeline_test

import (
	"errors"
	"fmt"
	"math/rand/v2"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
)

// The plausibility guard rejects a record before the model learns from
// it: a channel outside its configured bounds (out_of_range), or a value
// absurdly far from its channel's recent values on a warm model
// (implausible). The stream is invented for the example.
func Example_guard() {
	m := config.DefaultModel()
	m.Name, m.Subject = "bearing-temp", "plant.bearing"
	m.Features = []string{"vibration", "suction_kpa"}
	m.Guard.Bounds = []config.Bound{{Feature: "suction_kpa", Min: config.Limit{V: 0, Set: true}}}
	p, err := pipeline.New(pipeline.Options{Model: &m})
	if err != nil {
		fmt.Println(err)
		return
	}
	rng := rand.New(rand.NewPCG(1, 2))
	now := time.Date(2026, 3, 4, 5, 0, 0, 0, time.UTC)
	for range 500 {
		vib := 2 + 0.3*rng.NormFloat64()
		rec := record.Record{X: []float64{vib, 300 + 10*rng.NormFloat64()}, Y: 60 + 4*vib + rng.NormFloat64()}
		if _, err := p.Apply(&rec, m.Features, now); err != nil {
			fmt.Println(err)
			return
		}
	}
	for _, x := range [][]float64{{1e29, 300}, {2, -5}, {2.5, 310}} {
		rec := record.Record{X: x, Y: 70}
		_, err := p.Apply(&rec, m.Features, now)
		var re *record.Error
		if errors.As(err, &re) {
			fmt.Println("rejected:", re.Reason)
			continue
		}
		fmt.Println("accepted", err)
	}
	applied, _ := p.Counts()
	fmt.Println("records applied:", applied)
	// Output:
	// rejected: implausible
	// rejected: out_of_range
	// accepted <nil>
	// records applied: 501
}
