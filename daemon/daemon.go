package daemon

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"golang.org/x/time/rate"

	"lariat/config"
	"lariat/sink"
	"lariat/sink/checkpoint"
)

// Errors returned by the daemon.
var (
	// ErrNoModels is returned by New for a configuration without models.
	ErrNoModels = errors.New("daemon: no models configured")
	// ErrStarted is returned by a second call of Run.
	ErrStarted = errors.New("daemon: Run called twice")
)

// ShutdownTimeout bounds the whole shutdown sequence (drain, final
// publication, closing NATS and HTTP).
const ShutdownTimeout = 10 * time.Second

// Daemon keeps the configured models current on their NATS streams. Build it
// with New, run it with Run; it is single-use.
type Daemon struct {
	cfg     *config.Config
	log     *slog.Logger
	reg     *prometheus.Registry
	metrics *sink.Metrics
	store   *sink.Store
	version string
	tick    time.Duration // model goroutine tick: idle steps and publication checks
	noIdle  bool          // tests: no idle steps (bit-exact comparisons)
	// minPublish is the least time between two versions of a model that
	// are not forced (the heartbeat and the final document always go out).
	minPublish time.Duration
	drainTO    time.Duration
	// rejectRate and rejectBurst limit the republication of each model's
	// rejected records (rejectlimit.go); tests change them.
	rejectRate  float64
	rejectBurst int
	unrouted    *rate.Limiter // the limiter of records no model is fed by

	workers []*worker
	byName  map[string]*worker
	routes  map[string][]*worker // subject pattern -> models fed by it
	// templates are the model entries with instances.key_token: their
	// instances are workers created on demand (template.go).
	templates []*template
	tmpl      map[string]*template
	tm        *sink.TemplateMetrics
	wg        *sync.WaitGroup // Run's goroutines, for instances loaded later

	run     atomic.Bool
	started chan struct{} // closed once listeners are bound and models subscribed
	out     *outbox
	ckpt    checkpoint.Store // the models' checkpoints (set by start, before the model goroutines)
	// ckptWrap, if set, wraps the checkpoint store once it is open (tests
	// that stop a process without its final checkpoints).
	ckptWrap func(checkpoint.Store) checkpoint.Store

	// Set while starting, read-only afterwards (published by closing started).
	srv      *server.Server
	nc       *nats.Conn
	in       ingest        // core subscriptions: score subjects, and model subjects with core intake
	streams  *streamIntake // durable intake; nil with core intake (set by watchBus, read after it joined)
	httpSrv  *http.Server
	httpAddr string
	natsURL  string

	conn      atomic.Pointer[nats.Conn] // d.nc for Ready, which HTTP may call while Run is starting
	pub       atomic.Pointer[sink.Publisher]
	busReady  atomic.Bool           // connected, subscriptions confirmed, publisher up
	intakeErr atomic.Pointer[error] // why the intake could not start, if it could not
	stopBus   context.CancelFunc
	busDone   chan struct{} // closed when watchBus has finished setting up the intake
	stopping  atomic.Bool

	closeOnce sync.Once
}

// Option configures a Daemon beyond its configuration file.
type Option func(*Daemon) error

// WithLogger sets the logger; the default discards everything.
func WithLogger(l *slog.Logger) Option {
	return func(d *Daemon) error {
		if l == nil {
			return errors.New("daemon: nil logger")
		}
		d.log = l
		return nil
	}
}

// WithRegistry sets the Prometheus registry the daemon registers its metrics
// on and serves at /metrics. The default is a fresh registry with the Go and
// process collectors.
func WithRegistry(r *prometheus.Registry) Option {
	return func(d *Daemon) error {
		if r == nil {
			return errors.New("daemon: nil registry")
		}
		d.reg = r
		return nil
	}
}

// WithVersion sets the version string shown on the status page.
func WithVersion(v string) Option {
	return func(d *Daemon) error { d.version = v; return nil }
}

// New builds a daemon for cfg (already validated, see config.Load); it
// starts nothing. cfg must not change afterwards.
func New(cfg *config.Config, opts ...Option) (*Daemon, error) {
	if cfg == nil || len(cfg.Models) == 0 {
		return nil, ErrNoModels
	}
	d := &Daemon{
		cfg:         cfg,
		log:         discardLogger(),
		store:       sink.NewStore(),
		tick:        100 * time.Millisecond,
		minPublish:  time.Second,
		drainTO:     5 * time.Second,
		rejectRate:  rejectRate,
		rejectBurst: rejectBurst,
		byName:      make(map[string]*worker),
		routes:      make(map[string][]*worker),
		tmpl:        make(map[string]*template),
		started:     make(chan struct{}),
	}
	for _, o := range opts {
		if err := o(d); err != nil {
			return nil, err
		}
	}
	if d.reg == nil {
		d.reg = prometheus.NewRegistry()
		d.reg.MustRegister(collectors.NewGoCollector(),
			collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	}
	m, err := sink.NewMetrics(d.reg)
	if err != nil {
		return nil, fmt.Errorf("daemon: metrics: %w", err)
	}
	d.metrics = m
	if d.tm, err = sink.NewTemplateMetrics(d.reg); err != nil {
		return nil, fmt.Errorf("daemon: metrics: %w", err)
	}
	d.out = newOutbox(d)
	d.unrouted = newRejectLimiter(d.rejectRate, d.rejectBurst)
	for i := range cfg.Models {
		if cfg.Models[i].Template() {
			t := newTemplate(d, &cfg.Models[i])
			d.templates = append(d.templates, t)
			d.tmpl[t.name] = t
			continue
		}
		w, err := newWorker(d, &cfg.Models[i])
		if err != nil {
			return nil, err
		}
		d.workers = append(d.workers, w)
		d.byName[w.name] = w
		d.routes[w.cfg.Subject] = append(d.routes[w.cfg.Subject], w)
		d.store.Register(w.name)
	}
	return d, nil
}

// Started is closed once Run has bound its listeners and subscribed every
// model (the NATS connection itself may still be pending for an external
// server; see Ready). It is never closed if Run fails to start.
func (d *Daemon) Started() <-chan struct{} { return d.started }

// HTTPAddr returns the HTTP server's bound address ("" before Started).
func (d *Daemon) HTTPAddr() string { return d.httpAddr }

// NATSURL returns the URL the daemon connects to: the embedded server's
// client URL, or the configured external URL ("" before Started).
func (d *Daemon) NATSURL() string { return d.natsURL }

// Registry returns the Prometheus registry the daemon's metrics live in.
func (d *Daemon) Registry() *prometheus.Registry { return d.reg }

// Store returns the store of published model documents.
func (d *Daemon) Store() *sink.Store { return d.store }

// Ready returns nil when the daemon is ready to serve: connected to NATS,
// every model subscribed, the publisher up and every model able to publish
// its new versions; otherwise the reason ("degraded: model M does not
// publish: ..." when a model's last version could not be built or stored).
func (d *Daemon) Ready() error {
	nc := d.conn.Load()
	switch {
	case d.stopping.Load():
		return errors.New("shutting down")
	case nc == nil:
		return errors.New("not started")
	case !nc.IsConnected():
		// The last error names the cause, e.g. a TLS certificate the
		// configured CA does not verify (a retry never fixes that).
		if err := nc.LastError(); err != nil {
			return fmt.Errorf("NATS not connected (%s): %w", nc.Status(), d.explainConnErr(err))
		}
		return fmt.Errorf("NATS not connected (%s)", nc.Status())
	case d.intakeErr.Load() != nil:
		return fmt.Errorf("intake not started: %w", *d.intakeErr.Load())
	case !d.busReady.Load():
		return errors.New("subscriptions not confirmed yet")
	}
	for _, w := range d.workers {
		if p := w.problem.Load(); p != nil {
			return fmt.Errorf("degraded: model %s does not publish: %s", w.name, *p)
		}
	}
	for _, t := range d.templates {
		for _, w := range t.workers() {
			if p := w.problem.Load(); p != nil {
				return fmt.Errorf("degraded: model %s does not publish: %s", w.name, *p)
			}
		}
	}
	return nil
}

// lookup returns the worker of a model or of a template's instance
// (<template>.<key>; an unloaded instance is loaded).
func (d *Daemon) lookup(name string) (*worker, bool) {
	if w, ok := d.byName[name]; ok {
		return w, true
	}
	for i := 0; i < len(name); i++ {
		if name[i] == '.' {
			if t := d.tmpl[name[:i]]; t != nil && d.wg != nil {
				return t.lookup(name[i+1:])
			}
			break
		}
	}
	return nil, false
}

// Run starts the daemon and blocks until ctx is done, then shuts down in the
// order written in the package documentation and returns. It returns an
// error only if the daemon could not start or the shutdown did not finish
// within ShutdownTimeout; a clean stop returns nil.
func (d *Daemon) Run(ctx context.Context) error {
	if !d.run.CompareAndSwap(false, true) {
		return ErrStarted
	}
	d.log.Debug("configuration", "config", d.cfg)
	var wg sync.WaitGroup // every goroutine started below joins it
	if err := d.start(&wg); err != nil {
		d.shutdown(&wg)
		return err
	}
	close(d.started)
	d.log.Info("lariat running", "http", d.httpAddr, "nats", d.natsURL,
		"embedded", d.srv != nil, "models", len(d.workers))
	<-ctx.Done()
	d.log.Info("shutting down", "cause", context.Cause(ctx))
	return d.shutdown(&wg)
}

// start brings the daemon up in dependency order: HTTP (so /readyz answers
// during the rest), NATS, model goroutines, subscriptions, the bus watcher.
func (d *Daemon) start(wg *sync.WaitGroup) error {
	d.wg = wg
	if err := d.startHTTP(wg); err != nil {
		return err
	}
	if err := d.startNATS(); err != nil {
		return err
	}
	if err := d.restoreModels(); err != nil {
		return err
	}
	d.in = newCoreIngest(d.nc, d.cfg.NATS.PendingMsgs, d.cfg.NATS.PendingBytes)
	d.out.running.Store(true)
	wg.Go(d.out.run)
	for _, w := range d.workers {
		w.running.Store(true) // before the goroutine starts, so wait never misses it
		wg.Go(w.run)
	}
	for _, t := range d.templates {
		t.started = true
		wg.Go(t.run)
	}
	if d.cfg.Intake.Mode == config.IntakeCore {
		if err := d.subscribeModels(); err != nil {
			return err
		}
	} // else the durable intake starts once the bus is up (watchBus)
	// Unlabeled records to score (logistic models' score_subject, scoring.go).
	if err := d.subscribeScoring(); err != nil {
		return err
	}
	busCtx, cancel := context.WithCancel(context.Background())
	d.stopBus = cancel
	d.busDone = make(chan struct{})
	wg.Go(func() { d.watchBus(busCtx) })
	return nil
}

// restoreModels opens the checkpoint store under data_dir and restores
// every model that has a good checkpoint, before any model goroutine runs.
func (d *Daemon) restoreModels() error {
	store, err := d.openCheckpoints()
	if err != nil {
		return fmt.Errorf("daemon: %w", err)
	}
	if d.ckptWrap != nil {
		store = d.ckptWrap(store)
	}
	d.ckpt = store
	for _, w := range d.workers {
		w.restored = w.restore()
	}
	for _, t := range d.templates {
		if t.shared == nil {
			t.loadIndex(t.parts[0]) // a shared partition's when it is taken
		}
	}
	return nil
}

// subscribeModels subscribes the models' subjects with core NATS.
func (d *Daemon) subscribeModels() error {
	for subject, ws := range d.routes {
		if err := d.in.subscribe(subject, ws, d.handler(subject, ws)); err != nil {
			return fmt.Errorf("daemon: subscribing %s: %w", subject, err)
		}
	}
	for _, t := range d.templates {
		if err := d.in.subscribe(t.cfg.Subject, nil, t.handleCore); err != nil {
			return fmt.Errorf("daemon: subscribing %s: %w", t.cfg.Subject, err)
		}
	}
	return nil
}

// startHTTP binds the HTTP listener and serves in a goroutine owned by Run.
func (d *Daemon) startHTTP(wg *sync.WaitGroup) error {
	ln, err := net.Listen("tcp", d.cfg.HTTP.Listen)
	if err != nil {
		return fmt.Errorf("daemon: HTTP listen: %w", err)
	}
	token, err := d.cfg.HTTP.AdminToken()
	if err != nil {
		ln.Close()
		return fmt.Errorf("daemon: admin token: %w", err)
	}
	h := sink.NewHandler(sink.HandlerOptions{
		Store:        d.store,
		AdminToken:   token,
		Predictor:    predictor{d},
		Thresholds:   d, // threshold.go
		Ready:        d.Ready,
		Partitions:   d.partitions,
		Gatherer:     d.reg,
		MaxBodyBytes: d.cfg.HTTP.MaxBodyBytes,
		Version:      d.version,
		Epoch:        strconv.FormatInt(time.Now().UnixNano(), 36),
	})
	d.httpSrv = sink.NewServer(ln.Addr().String(), h)
	d.httpAddr = ln.Addr().String()
	wg.Go(func() {
		if err := d.httpSrv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			d.log.Error("HTTP server stopped", "err", err)
		}
	})
	return nil
}

// startNATS starts the embedded server when no URL is configured, then
// connects. The connection retries in the background if the server is not
// up yet, so Run does not fail because the bus starts later.
func (d *Daemon) startNATS() error {
	url := d.cfg.NATS.URL
	if !d.cfg.NATS.External() {
		if err := os.MkdirAll(d.cfg.DataDir, 0o750); err != nil {
			return fmt.Errorf("daemon: data dir: %w", err)
		}
		so, err := embeddedOptions(d.cfg.NATS.Listen, d.cfg.DataDir)
		if err != nil {
			return err
		}
		s, err := startEmbedded(so, d.log)
		if err != nil {
			return err
		}
		d.srv = s
		url = s.ClientURL()
	}
	d.natsURL = url
	opts, err := d.connectOptions()
	if err != nil {
		return err
	}
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		return fmt.Errorf("daemon: connecting to NATS at %s: %w", url, err)
	}
	d.nc = nc
	d.conn.Store(nc)
	return nil
}

// shutdown stops everything in the documented order; safe to call twice.
func (d *Daemon) shutdown(wg *sync.WaitGroup) error {
	var err error
	d.closeOnce.Do(func() { err = d.stopAll(wg) })
	return err
}

func (d *Daemon) stopAll(wg *sync.WaitGroup) error {
	deadline := time.Now().Add(ShutdownTimeout)
	ctx, cancel := context.WithDeadline(context.Background(), deadline)
	defer cancel()
	d.stopping.Store(true)
	var errs []error
	// 1. Stop intake: drain the subscriptions so no handler runs again.
	if d.in != nil {
		dctx, dcancel := context.WithTimeout(ctx, d.drainTO)
		if err := d.in.drain(dctx); err != nil {
			errs = append(errs, err)
		}
		dcancel()
	}
	if d.stopBus != nil {
		d.stopBus()
		<-d.busDone // the durable intake, if any, is set up or given up
	}
	if d.streams != nil {
		dctx, dcancel := context.WithTimeout(ctx, d.drainTO)
		if err := d.streams.drain(dctx); err != nil {
			errs = append(errs, err)
		}
		dcancel()
	}
	// 2. Drain the queues: each model applies what it holds, publishes its
	// final document and returns.
	for _, t := range d.templates {
		if err := t.stopAll(ctx); err != nil {
			errs = append(errs, err)
		}
	}
	for _, w := range d.workers {
		w.stop()
	}
	for _, w := range d.workers {
		if err := w.wait(ctx); err != nil {
			errs = append(errs, err)
		}
	}
	// 3. Publish the final documents, then flush and close NATS.
	d.out.close()
	if err := d.out.wait(ctx); err != nil {
		errs = append(errs, err)
	}
	if d.nc != nil {
		if d.nc.IsConnected() {
			_ = d.nc.FlushWithContext(ctx)
		}
		d.nc.Close()
	}
	if d.srv != nil {
		d.srv.Shutdown()
		d.srv.WaitForShutdown()
	}
	// 4. Shut the HTTP server last, so /readyz says why until the end.
	if d.httpSrv != nil {
		if err := d.httpSrv.Shutdown(ctx); err != nil {
			errs = append(errs, fmt.Errorf("daemon: HTTP shutdown: %w", err))
			d.httpSrv.Close()
		}
	}
	done := make(chan struct{})
	go func() { wg.Wait(); close(done) }()
	select {
	case <-done:
	case <-ctx.Done():
		errs = append(errs, errors.New("daemon: goroutines still running after the shutdown timeout"))
	}
	err := errors.Join(errs...)
	if err != nil {
		d.log.Error("shutdown incomplete", "err", err)
	} else {
		d.log.Info("stopped")
	}
	return err
}
