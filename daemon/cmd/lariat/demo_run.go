package main

// This file runs `lariat demo` (the cobra command is in demo.go): the daemon
// with the bundled demo configuration, fed by the invented plant.

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"strings"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon"
	"lariat/daemon/plant"
)

// demoOptions configures runDemo; the zero value gives the defaults shown.
type demoOptions struct {
	// Data is the data directory (streams and checkpoints); default the
	// demo configuration's data_dir, ./lariat-demo-data, kept across runs.
	Data string
	// Duration bounds the run; 0 runs until ctx is done.
	Duration time.Duration
	// FaultAfter is when the simulated bearing fault begins; default 3m,
	// negative means never.
	FaultAfter time.Duration
	// Rate is the plant's records per second; default 200.
	Rate float64
	// Seed seeds the plant; default 1.
	Seed uint64
	// Out receives the banner, the narration and the summary; default
	// io.Discard.
	Out io.Writer
	// Every is the narration period: a line per model this often; default
	// 5s.
	Every time.Duration
	// Logger is the daemon's logger; default discards.
	Logger *slog.Logger
	// Version is shown on the status page.
	Version string
	// NATSListen and HTTPListen override the demo configuration's
	// addresses (127.0.0.1:4222 and 127.0.0.1:8080; a busy port is replaced
	// by a free one).
	NATSListen, HTTPListen string
}

// demoModels are the demo configuration's model names (config/demo.yaml).
const (
	demoTrip    = "pump-trip"
	demoBearing = "bearing-temp"
)

// runDemo runs the demo: the daemon with the bundled demo configuration on
// an embedded NATS server, fed by the simulated (invented) plant, until ctx
// is done or the duration has passed.
func runDemo(ctx context.Context, o demoOptions) error {
	if o.Out == nil {
		o.Out = io.Discard
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	if o.Every <= 0 {
		o.Every = 5 * time.Second
	}
	cfg, err := config.Demo()
	if err != nil {
		return fmt.Errorf("demo: config: %w", err)
	}
	if o.Data != "" {
		cfg.DataDir = o.Data
	} // else the demo configuration's data_dir: kept, so a restarted demo continues where it stopped
	if o.NATSListen != "" {
		cfg.NATS.Listen = o.NATSListen
	}
	if o.HTTPListen != "" {
		cfg.HTTP.Listen = o.HTTPListen
	}
	var notes []string
	cfg.NATS.Listen, notes = freeOr(cfg.NATS.Listen, "NATS", notes)
	cfg.HTTP.Listen, notes = freeOr(cfg.HTTP.Listen, "HTTP", notes)
	if err := cfg.Validate(); err != nil {
		return fmt.Errorf("demo: config: %w", err)
	}
	opts := []daemon.Option{daemon.WithVersion(o.Version)}
	if o.Logger != nil {
		opts = append(opts, daemon.WithLogger(o.Logger))
	}
	d, err := daemon.New(cfg, opts...)
	if err != nil {
		return err
	}
	if o.Duration > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, o.Duration)
		defer cancel()
	}
	runCtx, stopDaemon := context.WithCancel(context.Background())
	defer stopDaemon()
	runErr := make(chan error, 1)
	go func() { runErr <- d.Run(runCtx) }() // joined below
	select {
	case <-d.Started():
	case err := <-runErr:
		return err
	}
	plantCtx, stopPlant := context.WithCancel(ctx)
	defer stopPlant()
	start := time.Now()
	talk, err := newNarrator(o.Out, d.NATSURL(), cfg.SubjectPrefix, d.Store().Models, start)
	if err != nil {
		stopDaemon()
		return errors.Join(err, <-runErr)
	}
	pl, sent, err := startPlant(plantCtx, cfg, d.NATSURL(), start, o)
	if err != nil {
		talk.nc.Close()
		stopDaemon()
		return errors.Join(err, <-runErr)
	}
	po := pl.Options() // with the plant's defaults filled in
	talk.schedule(po.Rate, po.FaultAfter)
	printBanner(o.Out, cfg, d, pl, notes)
	stopTalk, talked := make(chan struct{}), make(chan struct{})
	go func() { talk.run(o.Every, stopTalk); close(talked) }() // joined below
	select {
	case <-ctx.Done():
	case err := <-runErr: // the daemon failed on its own
		stopPlant()
		<-sent
		close(stopTalk)
		<-talked
		return err
	}
	n := <-sent // the plant has stopped publishing
	end := time.Now()
	stopDaemon()
	err = <-runErr // the daemon has published its last alerts
	close(stopTalk)
	<-talked
	printSummary(o.Out, d, n)
	names := make([]string, 0, len(cfg.Models))
	for _, m := range cfg.Models {
		names = append(names, m.Name)
	}
	talk.summary(o.Out, names, end)
	return err
}

// freeOr returns addr if it can be bound now, else the same host with port 0
// (a free port chosen when the daemon binds), noting the change.
func freeOr(addr, what string, notes []string) (string, []string) {
	if _, port, _ := net.SplitHostPort(addr); port == "0" || port == "-1" {
		return addr, notes
	}
	ln, err := net.Listen("tcp", addr)
	if err == nil {
		ln.Close()
		return addr, notes
	}
	host, _, _ := net.SplitHostPort(addr)
	if host == "" {
		host = "127.0.0.1"
	}
	return net.JoinHostPort(host, "0"), append(notes, fmt.Sprintf("%s address %s is busy; using a free port instead", what, addr))
}

// startPlant connects a plain NATS client and publishes the simulated plant
// until ctx is done; the count of records sent arrives on the channel.
func startPlant(ctx context.Context, cfg *config.Config, url string, start time.Time, o demoOptions) (*plant.Plant, <-chan uint64, error) {
	nc, err := nats.Connect(url, nats.Name("lariat-demo-plant"))
	if err != nil {
		return nil, nil, fmt.Errorf("demo: plant: %w", err)
	}
	po := &plant.Options{Rate: o.Rate, FaultAfter: o.FaultAfter, Seed: o.Seed}
	if m, ok := cfg.Model(demoTrip); ok {
		po.TripSubject = subjectFor(m.Subject)
		if m.ScoreSubject != "" {
			po.ScoreSubject = subjectFor(m.ScoreSubject)
		}
	}
	if m, ok := cfg.Model(demoBearing); ok {
		po.TempSubject = subjectFor(m.Subject)
	}
	p := plant.New(po, start)
	sent := make(chan uint64, 1)
	go func() { // owned by runDemo: ends with ctx, reports on sent
		n, err := p.Run(ctx, nc)
		if err != nil && o.Logger != nil {
			o.Logger.Error("plant stopped", "err", err)
		}
		_ = nc.Flush()
		nc.Close()
		sent <- n
	}()
	return p, sent, nil
}

// subjectFor maps a model's subscription pattern onto a concrete subject per
// pump: a "*" token or a trailing ">" becomes the pump id.
func subjectFor(pattern string) func(pump string) string {
	return func(pump string) string {
		toks := strings.Split(pattern, ".")
		for i, t := range toks {
			if t == "*" || t == ">" {
				toks[i] = pump
				if t == ">" {
					toks = toks[:i+1]
				}
				break
			}
		}
		return strings.Join(toks, ".")
	}
}

// printBanner writes what runs where: the plant, the addresses, each
// model's subjects (from cfg, in the daemon's order) and commands to try.
func printBanner(w io.Writer, cfg *config.Config, d *daemon.Daemon, p *plant.Plant, notes []string) {
	po := p.Options()
	http := "http://" + d.HTTPAddr()
	fmt.Fprintf(w, "lariat demo: an INVENTED pumping station (simulated data, not a real plant)\n")
	for _, n := range notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
	fmt.Fprintf(w, "  plant:   %d pumps x %d channels, %.0f records/s", po.Pumps, len(p.Channels()), po.Rate)
	if po.FaultAfter > 0 {
		fmt.Fprintf(w, "; pump p%d's bearing starts to degrade after %s", po.FaultPump+1, po.FaultAfter)
	}
	fmt.Fprintf(w, "\n  NATS:    %s\n  status:  %s/\n  models:  %s/v1/models\n  metrics: %s/metrics\n", d.NATSURL(), http, http, http)
	fmt.Fprintf(w, "  data:    %s (streams and checkpoints: run the demo again to continue where it stopped; remove the directory for a fresh start)\n", cfg.DataDir)
	for _, m := range cfg.Models {
		fmt.Fprintf(w, "  %-13s reads %-26s publishes %s.model.%s\n", m.Name, m.Subject, cfg.SubjectPrefix, m.Name)
		if m.ScoreSubject != "" {
			fmt.Fprintf(w, "  %-13s scores %-25s alerts on %s.alert.%s\n", "", m.ScoreSubject, cfg.SubjectPrefix, m.Name)
		}
	}
	fmt.Fprintf(w, "  try:     lariat pull %s --from %s\n", demoTrip, http)
	fmt.Fprintf(w, "           nats sub '%s.>' --server %s\n", cfg.SubjectPrefix, d.NATSURL())
	fmt.Fprintf(w, "  stop:    Ctrl-C\n")
}

// printSummary writes the count of records published and each model's last
// published state.
func printSummary(w io.Writer, d *daemon.Daemon, sent uint64) {
	fmt.Fprintf(w, "lariat demo: plant published %d records\n", sent)
	for _, doc := range d.Store().Models() {
		fmt.Fprintf(w, "  %-13s version %d, λ index %d, %d nonzero of %d, held-out loss %.4g, seen %d\n",
			doc.Model, doc.Version, doc.LambdaIndex, len(doc.Coefficients), len(doc.Features),
			float64(doc.Holdout.Loss), doc.Records.Seen)
	}
}
