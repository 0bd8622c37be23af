//go:build tools

package tools

import (
	_ "github.com/nats-io/nats-server/v2/server"
	_ "github.com/nats-io/nats.go"
	_ "github.com/nats-io/nats.go/jetstream"
	_ "github.com/prometheus/client_golang/prometheus"
	_ "github.com/prometheus/client_golang/prometheus/promhttp"
	_ "github.com/prometheus/client_golang/prometheus/testutil"
	_ "github.com/spf13/cobra"
	_ "go.yaml.in/yaml/v3"
	_ "gonum.org/v1/gonum/mat"
	_ "gonum.org/v1/gonum/floats"
	_ "pgregory.net/rapid"
	_ "golang.org/x/term"
)
