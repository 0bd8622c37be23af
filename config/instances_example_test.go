package config_test

import (
	"fmt"

	"lariat/config"
)

// The instance key of a record is the subject's token at key_token.
func ExampleInstanceKey() {
	key := config.InstanceKey("plant.p07.trip", 2)
	fmt.Println(key, config.ValidKey(key), "trip."+key)
	fmt.Println(config.ValidKey("_p07"), config.ValidKey("p.07"))
	// Output:
	// p07 true trip.p07
	// false false
}
