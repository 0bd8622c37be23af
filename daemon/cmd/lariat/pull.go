package main

import (
	"encoding/json"
	"fmt"
	"net/http"
	"time"

	"github.com/spf13/cobra"

	"lariat/daemon"
	"lariat/sink"
)

func newPullCmd() *cobra.Command {
	var (
		from    string
		raw     bool
		timeout time.Duration
	)
	cmd := &cobra.Command{
		Use:   "pull NAME --from URL",
		Short: "Fetch a model from a running daemon and print it",
		Long: `pull fetches the current model NAME from a running lariat's HTTP API and
prints its nonzero coefficients (raw units and standardized), λ and the
held-out metrics as a table, or with --json the model JSON unchanged.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			client := &http.Client{Timeout: timeout}
			body, err := daemon.Pull(cmd.Context(), client, from, args[0])
			if err != nil {
				return err
			}
			if raw {
				_, err = cmd.OutOrStdout().Write(body)
				return err
			}
			var doc sink.ModelDoc
			if err := json.Unmarshal(body, &doc); err != nil {
				return fmt.Errorf("decoding the model: %w", err)
			}
			return daemon.WriteModel(cmd.OutOrStdout(), &doc)
		},
	}
	cmd.Flags().StringVar(&from, "from", "http://127.0.0.1:8080", "base URL of the daemon's HTTP API")
	cmd.Flags().BoolVar(&raw, "json", false, "print the model JSON unchanged")
	cmd.Flags().DurationVar(&timeout, "timeout", 10*time.Second, "HTTP timeout")
	return cmd
}
