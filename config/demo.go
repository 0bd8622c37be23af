package config

import _ "embed"

// DemoYAML is the configuration used by `lariat demo`: an invented pumping
// station with two models. The demo runner overrides the listen addresses
// and the data directory.
//
//go:embed demo.yaml
var DemoYAML []byte

// Demo parses [DemoYAML].
func Demo() (*Config, error) { return Parse("demo.yaml", DemoYAML) }
