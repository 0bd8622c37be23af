package main

import (
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"lariat/config"
)

// stderr is where main prints a failing command's error.
var stderr io.Writer = os.Stderr

// errCheckFailed is returned by check after printing the problems.
var errCheckFailed = errors.New("configuration has errors")

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
			cfg, err := config.Load(file)
			if err == nil {
				err = cfg.Check()
			}
			if err != nil {
				fmt.Fprintln(cmd.ErrOrStderr(), err)
				return &exitError{code: 1, err: nil}
			}
			_, err = fmt.Fprintf(cmd.OutOrStdout(), "%s: ok (%d models)\n", file, len(cfg.Models))
			return err
		},
	}
	cmd.Flags().StringVarP(&file, "config", "c", "", "configuration file (YAML)")
	_ = cmd.MarkFlagRequired("config")
	return cmd
}
