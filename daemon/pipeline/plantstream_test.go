package pipeline

import (
	"math"
	"testing"
	"time"

	"lariat/config"
	"lariat/daemon/plant"
	"lariat/daemon/record"
)

// TestPlantStreamFinite feeds the demo configuration's trip model 10k plant
// records through the record decoder and the pipeline (no bus), with idle
// steps in between, and checks that
// no coefficient, intercept or held-out score ever becomes NaN or Inf (the
// plant has 40 channels in a 64-column ladder: 24 columns never see a value).
func TestPlantStreamFinite(t *testing.T) {
	cfg, err := config.Demo()
	if err != nil {
		t.Fatal(err)
	}
	m, _ := cfg.Model("pump-trip")
	w, err := New(Options{Model: m})
	if err != nil {
		t.Fatal(err)
	}
	dec := record.NewDecoder(&record.DecoderOptions{Features: m.Features, MaxFeatures: w.Width(), Logistic: true, Missing: m.Missing})
	var rec record.Record
	p := plant.New(&plant.Options{Seed: 1, TripSubject: func(string) string { return "trip" }, TempSubject: func(string) string { return "temp" }}, time.Unix(0, 0))
	for i := range 20000 {
		subj, msg := p.Next()
		if subj != "trip" {
			continue
		}
		if err := dec.Decode(msg, &rec); err != nil {
			t.Fatalf("record %d: %v", i, err)
		}
		if _, err := w.Apply(&rec, dec.Names(), time.Unix(0, 0)); err != nil {
			t.Fatalf("record %d: %v", i, err)
		}
		if i%50 == 0 {
			w.Idle(64)
		}
		for _, s := range w.Scores() {
			if math.IsNaN(s.Loss) {
				t.Fatalf("record %d: NaN score %+v", i, s)
			}
		}
		for k := range w.Ladder().Size() {
			m := w.Ladder().Model(k)
			for j, c := range m.Coef {
				if math.IsNaN(c) || math.IsInf(c, 0) {
					t.Fatalf("record %d: member %d coef %d = %v", i, k, j, c)
				}
			}
			if math.IsNaN(m.Intercept) {
				t.Fatalf("record %d: member %d intercept NaN", i, k)
			}
		}
	}
}
