package main

import (
	"github.com/spf13/cobra"

	"lariat/daemon"
)

func newRunCmd(lf *logFlags) *cobra.Command {
	var file string
	cmd := &cobra.Command{
		Use:   "run -c FILE",
		Short: "Run the daemon from a configuration file",
		Long: `run starts lariat with the configuration file: an embedded NATS server when
nats.url is empty (else a connection to the external server), one model per
models entry, the HTTP API. It runs until SIGINT or SIGTERM, then stops
intake, applies every queued record, publishes the final models and exits.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			cfg, err := loadChecked(cmd, file)
			if err != nil {
				return err
			}
			log, err := lf.logger(cmd.ErrOrStderr(), cfg.Log.Level, cfg.Log.Format)
			if err != nil {
				return err
			}
			d, err := daemon.New(cfg, daemon.WithLogger(log), daemon.WithVersion(version))
			if err != nil {
				return err
			}
			return d.Run(cmd.Context())
		},
	}
	cmd.Flags().StringVarP(&file, "config", "c", "", "configuration file (YAML)")
	_ = cmd.MarkFlagRequired("config")
	return cmd
}
