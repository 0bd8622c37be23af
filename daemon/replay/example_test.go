package replay_test

import (
	"fmt"
	"log"

	"lariat/config"
	"lariat/daemon/replay"
)

// Example replays the bundled (invented) recording through the demo's
// bearing-temperature model and reports what happened.
func Example() {
	c, err := config.Demo()
	if err != nil {
		log.Fatal(err)
	}
	m, _ := c.Model("bearing-temp")
	m.Window.Records = 2000
	res, err := replay.Run("../../testdata/demo-stream.jsonl", replay.Options{Model: m})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("applied", res.Applied, "retunes", len(res.History))
	for _, a := range res.Alerts[:2] {
		fmt.Println(a.Index, a.Alert.Kind)
	}
	// Each version is the exact optimum of its window, which moves less
	// from record to record than the streaming members did, so fewer
	// versions pass the publish tolerance; λ* is chosen among exact fits
	// of the members.
	fmt.Println("final version", res.Final.Version, "λ index", res.Final.LambdaIndex)
	// Output:
	// applied 6000 retunes 30
	// 3010 performance
	// 3400 model
	// final version 4037 λ index 3
}
