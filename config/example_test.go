package config_test

import (
	"fmt"

	"lariat/config"
)

func ExampleParse() {
	cfg, err := config.Parse("lariat.yaml", []byte(`
models:
  - name: pump-trip
    subject: plant.pump.trip
    loss: logistic
    threshold: {mode: fpr, target: 0.05}
`))
	if err != nil {
		fmt.Println(err)
		return
	}
	m := cfg.Models[0]
	fmt.Println(m.Name, m.Loss, m.Penalty, m.Ladder.Size, m.Publish.Heartbeat, m.Threshold.Mode)
	fmt.Println(cfg.NATS.External(), cfg.HTTP.Listen)

	_, err = config.Parse("lariat.yaml", []byte(`
models:
  - name: pump-trip
    subject: plant.pump.trip
    loss: squard
    ladder: {size: 0}
`))
	fmt.Println(err)
	// Output:
	// pump-trip logistic lasso 12 30s fpr
	// false 127.0.0.1:8080
	// lariat.yaml:5: models[0].loss: "squard" is not allowed (allowed: squared, logistic)
	// lariat.yaml:6: models[0].ladder.size: 0 is out of range (allowed: 1..100)
}

// A model's guard: the sd guard's defaults, and bounds on one channel
// (an unset limit is open).
func ExampleGuard() {
	cfg, err := config.Parse("lariat.yaml", []byte(`
models:
  - name: bearing-temp
    subject: plant.bearing
    features: [suction_kpa, flow_m3h]
    guard:
      bounds:
        - {feature: suction_kpa, min: 0, max: 2500}
        - {feature: flow_m3h, min: 0}
`))
	if err != nil {
		fmt.Println(err)
		return
	}
	g := cfg.Models[0].Guard
	fmt.Println("sd", g.SD, "warm", g.Warm, "persist", g.Persist)
	for _, b := range g.Bounds {
		fmt.Println(b.Feature, b.Min.Lo(), b.Max.Hi())
	}
	// Output:
	// sd 1000 warm 100 persist 10
	// suction_kpa 0 2500
	// flow_m3h 0 +Inf
}
