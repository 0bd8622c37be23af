package main

import (
	"time"

	"github.com/spf13/cobra"
)

func newDemoCmd(lf *logFlags) *cobra.Command {
	var o demoOptions
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run the daemon on a simulated (invented) pumping station",
		Long: `demo starts an embedded NATS server, the daemon with the bundled demo
configuration (two models: pump-trip, logistic; bearing-temp, linear) and a
simulated plant of four pumps with 40 channels each. The plant is invented.
A few minutes in, one pump's bearing starts to degrade (--fault-after).
If port 4222 or 8080 is busy a free port is used and the banner says so.
While it runs it prints a line per model every --every (version, λ index,
nonzero coefficients, held-out loss and AUC or R², records per second) and
each drift alert; at the end, the alerts by kind and whether the fault was
detected. It runs until Ctrl-C, or for --duration.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			log, err := lf.logger(cmd.ErrOrStderr(), "warn", "auto")
			if err != nil {
				return err
			}
			o.Out, o.Logger, o.Version = cmd.OutOrStdout(), log, version
			return runDemo(cmd.Context(), o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Data, "data", "", "data directory: streams and checkpoints, kept across runs so a restarted demo continues where it stopped (default ./lariat-demo-data; remove it for a fresh start)")
	f.DurationVar(&o.Duration, "duration", 0, "stop after this long (default: run until Ctrl-C)")
	f.DurationVar(&o.FaultAfter, "fault-after", 3*time.Minute, "when the simulated bearing fault begins (negative: never)")
	f.DurationVar(&o.Every, "every", 5*time.Second, "print a line per model this often")
	f.Float64Var(&o.Rate, "rate", 200, "records per second published by the plant")
	f.Uint64Var(&o.Seed, "seed", 1, "seed of the simulated plant")
	return cmd
}
