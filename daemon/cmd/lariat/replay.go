package main

// This file is the `lariat replay` command: a recorded stream through the
// daemon's per-model pipeline (package daemon/replay), its outputs and the
// progress bar.

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"golang.org/x/term"

	"lariat/config"
	"lariat/daemon/replay"
)

// replayFlags are the command's flags; the model settings apply over the
// configuration's model (or the daemon's defaults) only when given.
type replayFlags struct {
	config, model string
	format        string
	label, time   string
	loss, penalty string
	mix, lambda   float64
	rule          string
	seed          uint64
	window        int
	holdoutEvery  int
	holdout       int
	ladderSize    int
	retuneEvery   int
	drift         string
	thMode        string
	thTarget      float64

	json           bool
	alerts, models string
	plots          string
}

// newReplayCmd returns the `lariat replay` command.
func newReplayCmd() *cobra.Command {
	var rf replayFlags
	cmd := &cobra.Command{
		Use:   "replay FILE [flags]",
		Short: "Run a recorded stream through the daemon's per-model pipeline",
		Long: `replay reads a recorded stream and applies every record to one model's
pipeline exactly as the daemon's model goroutine does (same code, no NATS):
the record's time is the clock, a publication check follows each record and a
forced publication ends the stream. Idle steps, wall-clock work in the daemon,
are left out, so the same file and settings give the same bits.

FILE is JSON lines, one wire record per line ("t", "y", "x" or "v", "w",
"key"), or CSV (by the .csv extension or --format csv): a header row, the
label column --label, an optional time column --time (RFC 3339 or Unix
milliseconds), every other column with numbers in it a feature. A record
without a time gets the time of the record before plus 1 ms.

The model's settings come from -c FILE --model NAME, or from the daemon's
defaults; the flags below override either. The final model is printed as a
table (or --json); --alerts, --models and --plots write what happened along
the way.`,
		Example: `  lariat replay testdata/demo-stream.jsonl -c config/demo.yaml --model bearing-temp --plots plots
  lariat replay testdata/demo-pump.csv --label trip --loss logistic --retune-every 100 --alerts alerts.jsonl`,
		Args:         cobra.ExactArgs(1),
		SilenceUsage: true,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runReplay(cmd, args[0], &rf)
		},
	}
	d := config.DefaultModel()
	f := cmd.Flags()
	f.StringVarP(&rf.config, "config", "c", "", "configuration `file` (YAML) holding the model")
	f.StringVar(&rf.model, "model", "", "model `name` in the configuration (default: its only model)")
	f.StringVar(&rf.format, "format", "", "input format: jsonl | csv (default: by the file name)")
	f.StringVar(&rf.label, "label", "", "label `column` (CSV)")
	f.StringVar(&rf.time, "time", "", "time `column` (CSV): RFC 3339 or Unix milliseconds")
	f.StringVar(&rf.loss, "loss", d.Loss, "loss: squared | logistic")
	f.StringVar(&rf.penalty, "penalty", d.Penalty, "penalty: lasso | ridge | elastic-net")
	f.Float64Var(&rf.mix, "mix", 0, "elastic-net mix α in (0, 1) (elastic-net only)")
	f.Float64Var(&rf.lambda, "lambda", 0, "fixed λ > 0 (default: a ladder, λ chosen on held-out records; 0 is refused)")
	f.StringVar(&rf.rule, "rule", d.Retune.Rule, "λ selection rule: one-se | min")
	f.Uint64Var(&rf.seed, "seed", 0, "learner seed (default: derived from the model name, as the daemon does)")
	f.IntVar(&rf.window, "window", d.Window.Records, "train window in records")
	f.IntVar(&rf.holdoutEvery, "holdout-every", d.Holdout.Every, "hold out every k-th record (0: no holdout)")
	f.IntVar(&rf.holdout, "holdout", d.Holdout.Records, "held-out ring in records")
	f.IntVar(&rf.ladderSize, "ladder-size", d.Ladder.Size, "number of λ on the ladder")
	f.IntVar(&rf.retuneEvery, "retune-every", d.Retune.Every, "retune λ every n records")
	f.StringVar(&rf.drift, "drift", d.Drift.Performance, "performance drift detector: adwin | page-hinkley | off")
	f.StringVar(&rf.thMode, "threshold-mode", d.Threshold.Mode, "alert threshold mode (logistic): fixed | fpr | precision")
	f.Float64Var(&rf.thTarget, "threshold-target", d.Threshold.Target, "alert threshold target (fpr or precision modes)")
	f.BoolVar(&rf.json, "json", false, "print the final model as JSON")
	f.StringVar(&rf.alerts, "alerts", "", "write the alerts as JSON lines to `file`")
	f.StringVar(&rf.models, "models", "", "write every published version as JSON lines to `file`")
	f.StringVar(&rf.plots, "plots", "", "write the plots (PNG and SVG) into `dir`")
	return cmd
}

// runReplay resolves the model, replays the file and writes the outputs.
func runReplay(cmd *cobra.Command, file string, rf *replayFlags) error {
	m, err := rf.resolveModel(cmd)
	if err != nil {
		return err
	}
	o := replay.Options{Model: m, Format: rf.format, Label: rf.label, Time: rf.time, Seed: rf.seed}
	bar := newReplayBar(cmd.ErrOrStderr(), file)
	if bar != nil {
		o.Progress = func(n int) { _ = bar.Set(n) }
	}
	res, err := replay.Run(file, o)
	if bar != nil {
		_ = bar.Finish()
	}
	if err != nil {
		return err
	}
	return writeReplay(cmd, file, rf, res)
}

// resolveModel returns the model: the configuration's or the daemon's
// defaults, with the given flags over it, validated.
func (rf *replayFlags) resolveModel(cmd *cobra.Command) (*config.Model, error) {
	m := replay.DefaultModel("replay")
	if rf.config != "" {
		cfg, err := config.Load(rf.config)
		if err != nil {
			return nil, err
		}
		cm, err := pickModel(cfg, rf.model, rf.config)
		if err != nil {
			return nil, err
		}
		m = *cm
	} else if rf.model != "" {
		return nil, errors.New("replay: --model needs a configuration (-c)")
	}
	set := cmd.Flags().Changed
	if set("lambda") && rf.lambda == 0 {
		// A configuration's lambda 0 means "choose λ"; a flag's 0 is never
		// taken for "not given", and the pipeline has no unpenalized fit.
		return nil, errors.New("replay: --lambda 0: the streaming pipeline fits no unpenalized model (lariat fit --lambda 0 does); " +
			"leave --lambda out to choose λ on held-out records")
	}
	setS := func(flag string, dst *string, v string) {
		if set(flag) {
			*dst = v
		}
	}
	setI := func(flag string, dst *int, v int) {
		if set(flag) {
			*dst = v
		}
	}
	setF := func(flag string, dst *float64, v float64) {
		if set(flag) {
			*dst = v
		}
	}
	setS("loss", &m.Loss, rf.loss)
	setS("penalty", &m.Penalty, rf.penalty)
	setF("mix", &m.Mix, rf.mix)
	setF("lambda", &m.Lambda, rf.lambda)
	setS("rule", &m.Retune.Rule, rf.rule)
	setI("window", &m.Window.Records, rf.window)
	setI("holdout-every", &m.Holdout.Every, rf.holdoutEvery)
	setI("holdout", &m.Holdout.Records, rf.holdout)
	setI("ladder-size", &m.Ladder.Size, rf.ladderSize)
	setI("retune-every", &m.Retune.Every, rf.retuneEvery)
	setS("drift", &m.Drift.Performance, rf.drift)
	setS("threshold-mode", &m.Threshold.Mode, rf.thMode)
	setF("threshold-target", &m.Threshold.Target, rf.thTarget)
	if set("penalty") && m.Penalty == config.PenaltyElasticNet && m.Mix == 0 {
		m.Mix = 0.5 // lariat fit's default mix
	}
	if err := replay.Check(&m); err != nil {
		return nil, err
	}
	return &m, nil
}

// pickModel returns the model called name, or the only model.
func pickModel(cfg *config.Config, name, file string) (*config.Model, error) {
	if name == "" {
		if len(cfg.Models) != 1 {
			names := make([]string, len(cfg.Models))
			for i := range cfg.Models {
				names[i] = cfg.Models[i].Name
			}
			return nil, fmt.Errorf("replay: %s has %d models; choose one with --model (%s)", file, len(names), strings.Join(names, ", "))
		}
		return &cfg.Models[0], nil
	}
	m, ok := cfg.Model(name)
	if !ok {
		return nil, fmt.Errorf("replay: %s: no model %q", file, name)
	}
	return m, nil
}

// writeReplay writes the final model, the summary and the requested files.
func writeReplay(cmd *cobra.Command, file string, rf *replayFlags, res *replay.Result) error {
	stderr := cmd.ErrOrStderr()
	for i, rj := range res.Rejects {
		if i == 5 {
			fmt.Fprintf(stderr, "replay: ... %d more rejected records\n", len(res.Rejects)-i)
			break
		}
		fmt.Fprintf(stderr, "replay: %s:%d: rejected (%s): %s\n", file, rj.Line, rj.Reason, rj.Detail)
	}
	fmt.Fprintf(stderr, "replay: %s: %d records applied, %d rejected, %d retunes, %d versions, %d alerts\n",
		file, res.Applied, res.Rejected, len(res.History), len(res.Versions), len(res.Alerts))
	if rf.alerts != "" {
		if err := writeJSONLines(rf.alerts, len(res.Alerts), func(i int) any { return res.Alerts[i] }); err != nil {
			return err
		}
	}
	if rf.models != "" {
		if err := writeJSONLines(rf.models, len(res.Versions), func(i int) any { return res.Versions[i] }); err != nil {
			return err
		}
	}
	if rf.plots != "" {
		if err := res.WritePlots(rf.plots); err != nil {
			return err
		}
	}
	out := cmd.OutOrStdout()
	if res.Final == nil {
		return fmt.Errorf("replay: %s: no model was published (fewer records than retune.every, or none applied)", file)
	}
	if rf.json {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		return enc.Encode(res.Final)
	}
	return writeModel(out, res.Final)
}

// writeJSONLines writes n values as JSON lines to file.
func writeJSONLines(file string, n int, at func(i int) any) error {
	f, err := os.Create(file)
	if err != nil {
		return fmt.Errorf("replay: %w", err)
	}
	w := bufio.NewWriter(f)
	enc := json.NewEncoder(w)
	for i := range n {
		if err := enc.Encode(at(i)); err != nil {
			f.Close()
			return fmt.Errorf("replay: %s: %w", file, err)
		}
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return fmt.Errorf("replay: %s: %w", file, err)
	}
	return f.Close()
}

// newReplayBar returns a progress bar over the file's lines when w is a
// terminal, else nil (quiet in pipes, logs and tests).
func newReplayBar(w io.Writer, file string) *progressbar.ProgressBar {
	f, ok := w.(*os.File)
	if !ok || !term.IsTerminal(int(f.Fd())) {
		return nil
	}
	n, err := countLines(file)
	if err != nil {
		return nil // Run reports the problem
	}
	return progressbar.NewOptions64(n,
		progressbar.OptionSetWriter(f),
		progressbar.OptionSetDescription("replay"),
		progressbar.OptionShowCount(),
		progressbar.OptionShowIts(),
		progressbar.OptionSetItsString("records"),
		progressbar.OptionSetPredictTime(true),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionClearOnFinish(),
	)
}

// countLines counts the file's lines (the bar's total).
func countLines(file string) (int64, error) {
	f, err := os.Open(file)
	if err != nil {
		return 0, err
	}
	defer f.Close()
	var n int64
	buf := make([]byte, 1<<16)
	for {
		k, err := f.Read(buf)
		n += int64(bytes.Count(buf[:k], []byte{'\n'}))
		if err == io.EOF {
			return n, nil
		}
		if err != nil {
			return 0, err
		}
	}
}
