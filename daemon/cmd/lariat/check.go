package main

import (
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"lariat/config"
)

// stderr is where main prints a failing command's error.
var stderr io.Writer = os.Stderr

// loadChecked loads and checks the configuration file; on any problem it
// prints every one to the command's stderr and returns an exit status 1.
func loadChecked(cmd *cobra.Command, file string) (*config.Config, error) {
	cfg, err := config.Load(file)
	if err == nil {
		err = cfg.Check()
	}
	if err != nil {
		fmt.Fprintln(cmd.ErrOrStderr(), err)
		return nil, &exitError{code: 1}
	}
	return cfg, nil
}

func newCheckCmd() *cobra.Command {
	var file string
	cmd := &cobra.Command{
		Use:   "check -c FILE",
		Short: "Validate a configuration file and print every problem",
		Long: `check loads a configuration file, validates every field and resolves the
secrets and files it names, and prints every problem, one per line, as
file:line: field: what is wrong. It exits 1 if there is any.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			cfg, err := loadChecked(cmd, file)
			if err != nil {
				return err
			}
			_, err = fmt.Fprintf(cmd.OutOrStdout(), "%s: ok (%d models)\n", file, len(cfg.Models))
			return err
		},
	}
	cmd.Flags().StringVarP(&file, "config", "c", "", "configuration file (YAML)")
	_ = cmd.MarkFlagRequired("config")
	return cmd
}
