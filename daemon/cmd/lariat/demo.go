package main

import (
	"errors"
	"fmt"
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
			if err := demoFlags(cmd, &o); err != nil {
				return err
			}
			return runDemo(cmd.Context(), o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Data, "data", "", "data directory: streams and checkpoints, kept across runs so a restarted demo continues where it stopped (default ./lariat-demo-data; remove it for a fresh start)")
	f.DurationVar(&o.Duration, "duration", 0, "stop after this long (default: run until Ctrl-C)")
	f.DurationVar(&o.FaultAfter, "fault-after", 3*time.Minute, "when the simulated bearing fault begins (0: from the start; negative: never)")
	f.DurationVar(&o.Every, "every", 5*time.Second, "print a line per model this often")
	f.Float64Var(&o.Rate, "rate", 200, "records per second published by the plant")
	f.Uint64Var(&o.Seed, "seed", 1, "seed of the simulated plant (>= 1)")
	return cmd
}

// demoFlags reads a flag given as 0 as 0, never as "not given": demoOptions
// and the plant take 0 for their defaults, so an explicit 0 is refused
// where it has no meaning, and --fault-after 0 starts the fault with the
// first record.
func demoFlags(cmd *cobra.Command, o *demoOptions) error {
	set := cmd.Flags().Changed
	switch {
	case set("duration") && o.Duration <= 0:
		return fmt.Errorf("demo: --duration %v: give a positive duration, or leave it out to run until Ctrl-C", o.Duration)
	case set("every") && o.Every <= 0:
		return fmt.Errorf("demo: --every %v: the narration period must be positive", o.Every)
	case set("rate") && !(o.Rate > 0):
		return fmt.Errorf("demo: --rate %v: the plant's records per second must be positive", o.Rate)
	case set("seed") && o.Seed == 0:
		return errors.New("demo: --seed 0: the plant's seed must be >= 1")
	}
	if set("fault-after") && o.FaultAfter == 0 {
		o.FaultAfter = time.Nanosecond // the plant's 0 would mean its default, 3 minutes
	}
	return nil
}
