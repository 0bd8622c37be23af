package daemon

import (
	"math"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/plant"
)

// TestPlantStreamFinite feeds the demo configuration's trip model 10k plant
// records directly (no bus), with idle steps in between, and checks that
// no coefficient, intercept or held-out score ever becomes NaN or Inf (the
// plant has 40 channels in a 64-column ladder: 24 columns never see a value).
func TestPlantStreamFinite(t *testing.T) {
	cfg, _ := config.Demo()
	cfg.NATS.Listen, cfg.HTTP.Listen, cfg.DataDir = "127.0.0.1:-1", "127.0.0.1:0", t.TempDir()
	d, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	w := d.byName["pump-trip"]
	p := plant.New(&plant.Options{Seed: 1, TripSubject: func(string) string { return "trip" }, TempSubject: func(string) string { return "temp" }}, time.Unix(0, 0))
	for i := range 20000 {
		subj, msg := p.Next()
		if subj != "trip" {
			continue
		}
		w.intake(&nats.Msg{Subject: subj, Data: append([]byte(nil), msg...)})
		w.apply(<-w.queue)
		if i%50 == 0 {
			w.pipe.Idle(64)
		}
		for _, s := range w.pipe.Scores() {
			if math.IsNaN(s.Loss) {
				t.Fatalf("record %d: NaN score %+v", i, s)
			}
		}
		for k := range w.pipe.Ladder().Size() {
			m := w.pipe.Ladder().Model(k)
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
