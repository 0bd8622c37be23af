package daemon_test

import (
	"errors"
	"fmt"
	"os"

	"lariat/config"
	"lariat/daemon"
	"lariat/sink"
)

// The daemon is the sink.ThresholdSetter behind PUT
// /v1/models/{name}/threshold: it refuses unknown and non-logistic models
// (404 over HTTP) and invalid targets (400).
func ExampleDaemon_SetThresholdTarget() {
	dir, _ := os.MkdirTemp("", "lariat-example-")
	defer os.RemoveAll(dir)
	cfg := config.Default()
	cfg.DataDir = dir
	m := config.DefaultModel()
	m.Name, m.Subject, m.Loss = "flow", "plant.flow", config.LossSquared
	cfg.Models = []config.Model{m}
	d, err := daemon.New(cfg)
	if err != nil {
		fmt.Println(err)
		return
	}
	err = d.SetThresholdTarget("flow", "fpr", 0.02)
	fmt.Println(errors.Is(err, sink.ErrUnknownModel))
	err = d.SetThresholdTarget("pump", "fpr", 0.02)
	fmt.Println(errors.Is(err, sink.ErrUnknownModel))
	// Output:
	// true
	// true
}
