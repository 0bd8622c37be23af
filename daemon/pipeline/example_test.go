package pipeline_test

import (
	"fmt"
	"math/rand/v2"
	"time"

	"lariat/config"
	"lariat/daemon/pipeline"
	"lariat/daemon/record"
)

// A pipeline runs a model's whole per-record logic without NATS: apply
// decoded records, then ask for the version to publish. The stream is
// invented for the example: the bearing temperature of a pump follows its
// vibration (slope 4) and its load (slope 2), and a third channel carries
// nothing; the lasso keeps the two, shrunk a little (the one-SE rule picks
// the sparsest λ within a standard error of the best).
func Example() {
	m := config.DefaultModel()
	m.Name, m.Subject = "bearing-temp", "plant.bearing"
	m.Features = []string{"vibration", "load", "spare"}
	m.Window.Records, m.Retune.Every = 2000, 250
	p, err := pipeline.New(pipeline.Options{Model: &m})
	if err != nil {
		fmt.Println(err)
		return
	}
	rng := rand.New(rand.NewPCG(1, 2))
	dec := record.NewDecoder(&record.DecoderOptions{Features: m.Features, MaxFeatures: p.Width()})
	var rec record.Record
	t0 := time.Date(2026, 3, 4, 5, 0, 0, 0, time.UTC)
	for i := range 3000 {
		vib, load, spare := rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()
		temp := 60 + 4*vib + 2*load + 0.5*rng.NormFloat64()
		msg := fmt.Sprintf(`{"y": %g, "v": [%g, %g, %g]}`, temp, vib, load, spare)
		if err := dec.Decode([]byte(msg), &rec); err != nil {
			fmt.Println(err)
			return
		}
		if _, err := p.Apply(&rec, dec.Names(), t0.Add(time.Duration(i)*time.Second)); err != nil {
			fmt.Println(err)
			return
		}
	}
	s, err := p.Publish(t0.Add(time.Hour), 0, true)
	if err != nil || s == nil {
		fmt.Println("nothing to publish", err)
		return
	}
	fmt.Printf("version %d, %d of %d channels kept\n", s.Doc.Version, len(s.Doc.Coefficients), len(s.Names))
	fmt.Printf("vibration %.1f, load %.1f\n", s.Doc.Coefficients["vibration"], s.Doc.Coefficients["load"])
	// Output:
	// version 1, 2 of 3 channels kept
	// vibration 4.0, load 1.9
}
