package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"lariat/sink"
)

// newPullCmd returns the `lariat pull` command: one model fetched from a
// running daemon's HTTP API, printed as a table or as its JSON.
func newPullCmd() *cobra.Command {
	var (
		from    string
		raw     bool
		pmml    bool
		timeout time.Duration
	)
	cmd := &cobra.Command{
		Use:   "pull NAME --from URL",
		Short: "Fetch a model from a running daemon and print it",
		Long: `pull fetches the current model NAME from a running lariat's HTTP API and
prints its nonzero coefficients (raw units and standardized), λ and the
held-out metrics as a table, with --json the model JSON unchanged, or with
--pmml the model as a PMML 4.4 RegressionModel document (the daemon's
GET /v1/models/NAME/pmml, unchanged).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			client := &http.Client{Timeout: timeout}
			if raw && pmml {
				return errors.New("pull: --json and --pmml exclude each other")
			}
			if pmml {
				body, err := fetch(cmd.Context(), client, from, "application/xml", "v1", "models", args[0], "pmml")
				if err != nil {
					return err
				}
				_, err = cmd.OutOrStdout().Write(body)
				return err
			}
			body, err := fetchModel(cmd.Context(), client, from, args[0])
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
			return writeModel(cmd.OutOrStdout(), &doc)
		},
	}
	cmd.Flags().StringVar(&from, "from", "http://127.0.0.1:8080", "base URL of the daemon's HTTP API")
	cmd.Flags().BoolVar(&raw, "json", false, "print the model JSON unchanged")
	cmd.Flags().BoolVar(&pmml, "pmml", false, "print the model as PMML 4.4 XML, as the daemon serves it")
	cmd.Flags().DurationVar(&timeout, "timeout", 10*time.Second, "HTTP timeout")
	return cmd
}

// errPull is wrapped by fetchModel and fetch for an HTTP answer other than
// 200.
var errPull = errors.New("pull failed")

// fetchModel fetches a model document from a running daemon's HTTP API at base
// (e.g. "http://127.0.0.1:8080") and returns its JSON unchanged.
func fetchModel(ctx context.Context, client *http.Client, base, name string) ([]byte, error) {
	return fetch(ctx, client, base, "application/json", "v1", "models", name)
}

// fetch GETs the path of the elements (each path-escaped) below base with
// the Accept header accept and returns the body of a 200 answer unchanged.
func fetch(ctx context.Context, client *http.Client, base, accept string, elem ...string) ([]byte, error) {
	if client == nil {
		client = http.DefaultClient
	}
	esc := make([]string, len(elem))
	for i, e := range elem {
		esc[i] = url.PathEscape(e)
	}
	u, err := url.JoinPath(strings.TrimRight(base, "/"), esc...)
	if err != nil {
		return nil, fmt.Errorf("pull: %w", err)
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		return nil, fmt.Errorf("pull: %w", err)
	}
	req.Header.Set("Accept", accept)
	resp, err := client.Do(req)
	if err != nil {
		return nil, fmt.Errorf("pull: %w", err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(io.LimitReader(resp.Body, 64<<20))
	if err != nil {
		return nil, fmt.Errorf("pull: %w", err)
	}
	if resp.StatusCode != http.StatusOK {
		var e struct {
			Error string `json:"error"`
		}
		msg := strings.TrimSpace(string(body))
		if json.Unmarshal(body, &e) == nil && e.Error != "" {
			msg = e.Error
		}
		return nil, fmt.Errorf("%w: %s: %s: %s", errPull, u, resp.Status, msg)
	}
	return body, nil
}
