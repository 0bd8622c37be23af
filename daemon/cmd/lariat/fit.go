package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"lariat/daemon/fit"
)

// newFitCmd returns the `lariat fit` command: one CSV file, one penalized
// model, fitted to convergence by the daemon's own learner.
func newFitCmd() *cobra.Command {
	var (
		o           fit.Options
		mix, lambda float64
	)
	cmd := &cobra.Command{
		Use:   "fit --input FILE.csv --label COLUMN [flags]",
		Short: "Fit one penalized model to a CSV file and print it",
		Long: `fit reads one CSV file (a header row of column names, one record per row),
makes the whole file the window and runs the daemon's learner on it until the
KKT conditions of the objective hold to --tol. The label column is --label;
every other column with numbers in it is a feature (a column with no number at
all, such as an ID, is skipped; an empty, NA or NaN cell is a missing value,
imputed with the column mean).

Without --lambda, λ is chosen on held-out rows: every 5th row is held out, a
ladder of 12 λ is fitted on the rest (lasso and elastic net: from λ_max down
to 0.001·λ_max; ridge: from the λ where its effective degrees of freedom are
0.5 down to where they are rank − 0.5), moved down while the lowest held-out
loss sits at its smallest λ, the one-standard-error rule (--rule) picks λ,
and the model is refitted with that λ on every row. With fewer than 10 rows,
λ = 0.01·λ_max. --lambda 0 fits the unpenalized model (least squares or
maximum-likelihood logistic regression), or says why it does not exist.

The output is a table of the nonzero coefficients (raw units and standardized)
or, with --json, the model as JSON; --ladder adds the selection ladder.`,
		Example: `  lariat fit --input testdata/diabetes.csv --label progression
  lariat fit --input testdata/wdbc.csv --label malignant --loss logistic --penalty elastic-net --mix 0.5 --lambda 0.01 --json
  lariat fit --input testdata/demo-pump.csv --label trip --loss logistic --ladder`,
		Args:         cobra.NoArgs,
		SilenceUsage: true,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if err := fitFlags(cmd, &o, mix, lambda); err != nil {
				return err
			}
			return fit.Run(cmd.OutOrStdout(), o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Input, "input", "", "CSV `file` to fit (required)")
	f.StringVar(&o.Label, "label", "", "label `column` (required)")
	f.StringVar(&o.Loss, "loss", "squared", "loss: squared | logistic")
	f.StringVar(&o.Penalty, "penalty", "lasso", "penalty: lasso | ridge | elastic-net")
	f.Float64Var(&mix, "mix", fit.DefaultMix, "elastic-net mix α in (0, 1) (elastic-net only)")
	f.Float64Var(&lambda, "lambda", 0, "penalty strength λ >= 0, 0 = unpenalized (default: chosen on held-out rows)")
	f.StringVar(&o.Rule, "rule", "one-se", "λ selection rule without --lambda: one-se | min")
	f.BoolVar(&o.JSON, "json", false, "print the model as JSON")
	f.BoolVar(&o.Ladder, "ladder", false, "also print the selection ladder (λ, nonzero, held-out loss)")
	f.Float64Var(&o.Tol, "tol", fit.DefaultTol, "KKT tolerance (standardized scale)")
	f.IntVar(&o.MaxEpochs, "max-epochs", fit.DefaultEpochs, "epoch budget per ladder member")
	f.Uint64Var(&o.Seed, "seed", 1, "learner seed (0: derived from the name \"fit\")")
	return cmd
}

// fitFlags moves the flags whose zero value means something into o only
// when they were given (a zero is never taken for "not given"), and
// refuses an explicit zero where fit.Options would read it as its default.
func fitFlags(cmd *cobra.Command, o *fit.Options, mix, lambda float64) error {
	set := cmd.Flags().Changed
	if set("mix") {
		o.Mix = &mix
	}
	if set("lambda") {
		o.Lambda = &lambda
	}
	if set("tol") && !(o.Tol > 0) {
		return fmt.Errorf("fit: --tol %v: the KKT tolerance must be > 0 (default %g)", o.Tol, fit.DefaultTol)
	}
	if set("max-epochs") && o.MaxEpochs < 1 {
		return fmt.Errorf("fit: --max-epochs %d: the epoch budget must be >= 1 (default %d)", o.MaxEpochs, fit.DefaultEpochs)
	}
	return nil
}
