package main

import (
	"errors"
	"fmt"
	"io"
	"log/slog"

	"github.com/spf13/cobra"

	"lariat/daemon"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "dev"

// logFlags are the persistent flags that override the configuration's log
// section.
type logFlags struct{ level, format string }

// newRootCmd builds the lariat command tree.
func newRootCmd() *cobra.Command {
	lf := &logFlags{}
	root := &cobra.Command{
		Use:   "lariat",
		Short: "Keep penalized linear and logistic models current on NATS streams",
		Long: `lariat keeps lasso, ridge and elastic-net models (squared or logistic loss)
current on streams of labeled records arriving over NATS, chooses λ on
held-out data, and publishes the current models on NATS and over HTTP.`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.PersistentFlags().StringVar(&lf.level, "log-level", "", "log level: debug, info, warn, error (overrides the config)")
	root.PersistentFlags().StringVar(&lf.format, "log-format", "", "log format: auto, text, json (overrides the config)")
	root.AddCommand(
		newRunCmd(lf),
		newCheckCmd(),
		newDemoCmd(lf),
		newPullCmd(),
		newFitCmd(),
		newReplayCmd(),
		newVersionCmd(),
	)
	return root
}

// logger builds the process logger from the config's values, overridden by
// the flags when given.
func (lf *logFlags) logger(w io.Writer, level, format string) (*slog.Logger, error) {
	if lf.level != "" {
		level = lf.level
	}
	if lf.format != "" {
		format = lf.format
	}
	return daemon.NewLogger(w, level, format)
}

// exitError carries a specific exit status (e.g. 1 for a failed check).
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string {
	if e.err == nil {
		return fmt.Sprintf("exit status %d", e.code)
	}
	return e.err.Error()
}
func (e *exitError) Unwrap() error { return e.err }

// exitCode prints err and returns the process exit status for it.
func exitCode(err error) int {
	var ee *exitError
	if errors.As(err, &ee) {
		if ee.err != nil {
			fmt.Fprintln(stderr, ee.err)
		}
		return ee.code
	}
	fmt.Fprintln(stderr, "lariat:", err)
	return 1
}

func newVersionCmd() *cobra.Command {
	return &cobra.Command{
		Use:   "version",
		Short: "Print the version",
		Args:  cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			_, err := fmt.Fprintf(cmd.OutOrStdout(), "lariat %s\n", version)
			return err
		},
	}
}
