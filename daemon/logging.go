package daemon

import (
	"fmt"
	"io"
	"log/slog"
	"os"
	"strings"

	"golang.org/x/term"
)

// NewLogger returns a slog logger writing to w at the given level ("debug",
// "info", "warn" or "error"; empty means info) in the given format: "text",
// "json", or "auto" (empty too), which picks text when w is a terminal and
// JSON otherwise (a file, a pipe, a log collector).
func NewLogger(w io.Writer, level, format string) (*slog.Logger, error) {
	var lv slog.Level
	if level == "" {
		level = "info"
	}
	if err := lv.UnmarshalText([]byte(level)); err != nil {
		return nil, fmt.Errorf("daemon: log level %q (allowed: debug, info, warn, error)", level)
	}
	opts := &slog.HandlerOptions{Level: lv}
	switch strings.ToLower(format) {
	case "", "auto":
		if isTerminal(w) {
			return slog.New(slog.NewTextHandler(w, opts)), nil
		}
		return slog.New(slog.NewJSONHandler(w, opts)), nil
	case "text":
		return slog.New(slog.NewTextHandler(w, opts)), nil
	case "json":
		return slog.New(slog.NewJSONHandler(w, opts)), nil
	}
	return nil, fmt.Errorf("daemon: log format %q (allowed: auto, text, json)", format)
}

// isTerminal reports whether w is a file descriptor attached to a terminal.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// discardLogger returns a logger that drops everything (the default when no
// logger option is given, so a library user is never surprised by output).
func discardLogger() *slog.Logger { return slog.New(slog.DiscardHandler) }
