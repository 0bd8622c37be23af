package daemon

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/config"
	"lariat/daemon/record"
	"lariat/sink"
)

// connectOptions maps the nats section of the configuration onto nats.go
// options: reconnect forever, count reconnects, log slow consumers, and the
// configured authentication and TLS (external servers only).
func (d *Daemon) connectOptions() ([]nats.Option, error) {
	log := d.log.With("component", "nats")
	// lastConnErr is only touched by nats.go's callbacks, which run one at
	// a time on the connection's callback goroutine.
	var lastConnErr string
	opts := []nats.Option{
		nats.Name("lariat"),
		nats.MaxReconnects(-1),
		nats.ReconnectWait(time.Second),
		nats.RetryOnFailedConnect(true),
		nats.ConnectHandler(func(*nats.Conn) {
			lastConnErr = ""
			log.Info("NATS connected")
		}),
		nats.ReconnectErrHandler(func(_ *nats.Conn, err error) {
			// A failed first connection (a wrong TLS CA, a refused
			// client certificate, no server yet) and failed dials after
			// it: each distinct cause is logged once, not every retry.
			if msg := err.Error(); msg != lastConnErr {
				lastConnErr = msg
				log.Warn("NATS connection failed; retrying", "err", d.explainConnErr(err))
			}
		}),
		nats.DisconnectErrHandler(func(_ *nats.Conn, err error) {
			if !d.stopping.Load() {
				log.Warn("NATS disconnected", "err", err)
			}
		}),
		nats.ReconnectHandler(func(nc *nats.Conn) {
			lastConnErr = ""
			d.metrics.Reconnected()
			log.Info("NATS reconnected", "url", nc.ConnectedUrlRedacted())
		}),
		nats.ErrorHandler(func(_ *nats.Conn, sub *nats.Subscription, err error) {
			// nats.go reports a slow consumer once per episode; the drops
			// themselves are counted by watchBus from sub.Dropped.
			subj := ""
			if sub != nil {
				subj = sub.Subject
			}
			if errors.Is(err, nats.ErrSlowConsumer) {
				log.Warn("slow consumer: NATS client is dropping messages (raise nats.pending_msgs/pending_bytes or add capacity)", "subject", subj)
				return
			}
			log.Error("NATS async error", "subject", subj, "err", err)
		}),
	}
	n := d.cfg.NATS
	if !n.External() {
		return opts, nil
	}
	if n.User != "" {
		pw, err := n.ResolvePassword()
		if err != nil {
			return nil, fmt.Errorf("daemon: NATS password: %w", err)
		}
		opts = append(opts, nats.UserInfo(n.User, pw))
	}
	tok, err := n.ResolveToken()
	if err != nil {
		return nil, fmt.Errorf("daemon: NATS token: %w", err)
	}
	if tok != "" {
		opts = append(opts, nats.Token(tok))
	}
	if n.CredentialsFile != "" {
		opts = append(opts, nats.UserCredentials(n.CredentialsFile))
	}
	if n.NKeyFile != "" {
		o, err := nats.NkeyOptionFromSeed(n.NKeyFile)
		if err != nil {
			return nil, fmt.Errorf("daemon: NATS nkey: %w", err)
		}
		opts = append(opts, o)
	}
	if n.TLS.CAFile != "" {
		opts = append(opts, nats.RootCAs(n.TLS.CAFile))
	}
	if n.TLS.CertFile != "" {
		opts = append(opts, nats.ClientCert(n.TLS.CertFile, n.TLS.KeyFile))
	}
	return opts, nil
}

// explainConnErr adds the likely cause to a connection error that does not
// name one. A server that requires a client certificate rejects a client
// without one after the TLS 1.3 handshake has completed on the client's
// side, so the client sees either the server's "certificate required"
// alert or, depending on timing, only a closed connection (nats.go then
// reports "connection closed by remote after TLS handshake").
func (d *Daemon) explainConnErr(err error) error {
	if err == nil || !errors.Is(err, nats.ErrTLS) || !strings.Contains(err.Error(), "after TLS handshake") ||
		strings.Contains(err.Error(), "certificate required") {
		return err
	}
	if d.cfg.NATS.TLS.CertFile != "" {
		return fmt.Errorf("%w (the server closed the connection after the handshake: it may have refused the client certificate)", err)
	}
	return fmt.Errorf("%w (the server closed the connection after the handshake: it likely requires a client certificate, certificate required, and none is configured: set nats.tls.cert_file and nats.tls.key_file)", err)
}

// watchBus waits for the connection, confirms the subscriptions with a
// flush, opens the publisher (with the KV bucket when JetStream answers),
// then polls the subscriptions' drop counters every second until ctx ends.
func (d *Daemon) watchBus(ctx context.Context) {
	poll := time.NewTicker(50 * time.Millisecond)
	defer poll.Stop()
	setUp := false
	defer func() {
		if !setUp {
			close(d.busDone)
		}
	}()
	for !d.nc.IsConnected() || d.nc.FlushTimeout(2*time.Second) != nil {
		select {
		case <-ctx.Done():
			return
		case <-poll.C:
		}
	}
	d.pub.Store(d.openPublisher(ctx))
	d.out.kick()
	err := d.startIntake(ctx)
	setUp = true
	close(d.busDone)
	if err != nil {
		d.intakeErr.Store(&err)
		d.log.Error("intake not started: no records will be applied", "err", err)
		return
	}
	d.busReady.Store(true)
	d.log.Info("ready", "models", len(d.workers))
	drops := time.NewTicker(time.Second)
	defer drops.Stop()
	for {
		select {
		case <-ctx.Done():
			d.in.countDrops()
			return
		case <-drops.C:
			d.in.countDrops()
		}
	}
}

// startIntake starts the models' intake once the bus is up: the durable
// streams (intake.mode durable, or auto where JetStream answers), or core
// subscriptions (auto without JetStream; core mode subscribed at start).
func (d *Daemon) startIntake(ctx context.Context) error {
	mode := d.cfg.Intake.Mode
	if mode == config.IntakeCore {
		return nil
	}
	s, err := newStreamIntake(ctx, d)
	if err != nil {
		if mode == config.IntakeDurable {
			return err
		}
		for _, t := range d.templates {
			if t.shared != nil {
				return fmt.Errorf("%w (template %s has %d partitions, shared through JetStream)", err, t.name, len(t.parts))
			}
		}
		d.log.Warn("JetStream unavailable: intake falls back to core NATS subscriptions (at most once: records published while lariat is down are lost)", "err", err)
		return d.subscribeModels()
	}
	if err := s.start(ctx); err != nil {
		close(s.stop)
		return err
	}
	d.streams = s
	d.log.Info("durable intake", "streams", describeStreams(d.cfg))
	return nil
}

// openPublisher opens the sink publisher with the model KV bucket, or without
// it if JetStream is not available on the server.
func (d *Daemon) openPublisher(ctx context.Context) *sink.Publisher {
	o := &sink.PublisherOptions{Prefix: d.cfg.SubjectPrefix, Metrics: d.metrics, MaxRejectBytes: record.DefaultMaxBytes}
	p, err := sink.NewPublisher(ctx, d.nc, o)
	if err != nil {
		d.log.Warn("model key-value bucket unavailable; publishing on subjects only", "err", err)
		o.NoKV = true
		if p, err = sink.NewPublisher(ctx, d.nc, o); err != nil {
			d.log.Error("publisher unavailable", "err", err)
			return nil
		}
	}
	d.out.readVersions(ctx, p)
	return p
}

// handler returns the subscription callback for one subject pattern: every
// model fed by that pattern gets the message. It runs on the subscription's
// own goroutine (nats.go delivers one message at a time per subscription),
// which therefore owns those models' decoders.
func (d *Daemon) handler(pattern string, ws []*worker) func(*nats.Msg) {
	if len(ws) == 0 {
		return func(m *nats.Msg) {
			d.reject(nil, m.Subject, reasonNoModel, "no model is fed by subject pattern "+pattern, m.Data)
		}
	}
	return func(m *nats.Msg) {
		for _, w := range ws {
			w.intake(m)
		}
	}
}

// reasonNoModel is the reject reason of a record no model is fed by (only
// possible with intakes that route several patterns through one consumer).
const reasonNoModel = "no_model"

// unrouted is the model label and reject subject token of records no model
// is fed by; it can not collide with a model name, which starts with [a-z0-9].
const unrouted = "_unrouted"

// reject counts a rejected record and republishes it with its reason on
// <prefix>.reject.<model>, within the model's republish rate (rejectlimit.go;
// a reject past it is counted in lariat_rejects_not_republished_total). w
// is nil for a record no model is fed by.
func (d *Daemon) reject(w *worker, subject, reason, detail string, data []byte) {
	var (
		name = unrouted
		mm   *sink.ModelMetrics
		lim  = d.unrouted
	)
	if w != nil {
		name, mm, lim = w.name, w.mm, w.rejects
		w.rejected.Add(1)
	} else {
		mm = d.metrics.Model(unrouted)
	}
	mm.Rejected(reason)
	p := d.pub.Load()
	if p == nil {
		mm.NotRepublished.Inc()
		d.log.Debug("record rejected before the publisher is up", "model", name, "reason", reason, "detail", detail)
		return
	}
	if !lim.Allow() {
		mm.NotRepublished.Inc()
		return
	}
	_ = p.PublishReject(&sink.Reject{Model: name, Subject: subject, Reason: reason, Detail: detail, Data: data})
}

// ingest is the intake of labeled records from the bus. coreIngest uses
// core NATS subscriptions (at most once: a record lost while lariat is down
// is lost); a JetStream durable consumer can implement the same interface to
// deliver at least once, acknowledging a message when its model has applied
// it (see worker.done).
type ingest interface {
	// subscribe starts delivering messages on subject (wildcards allowed) to
	// h, one call at a time per subject; ws are the models it feeds (drops
	// are charged to them).
	subscribe(subject string, ws []*worker, h func(*nats.Msg)) error
	// drain stops intake: it returns when no handler runs or will run again,
	// after delivering what the client already holds.
	drain(ctx context.Context) error
	// countDrops adds the messages the client dropped since the last call
	// to the models' slow-consumer counters.
	countDrops()
}

// coreIngest subscribes with core NATS. Core NATS never blocks the server
// for a slow client: when a subscription's pending buffer is full the client
// drops messages. The pending limits are therefore raised deliberately
// (nats.pending_msgs, nats.pending_bytes) and every drop is counted.
type coreIngest struct {
	nc         *nats.Conn
	msgs, byts int

	mu   sync.Mutex
	subs []*coreSub
}

type coreSub struct {
	sub     *nats.Subscription
	models  []*worker
	dropped int
}

var _ ingest = (*coreIngest)(nil)

func newCoreIngest(nc *nats.Conn, pendingMsgs, pendingBytes int) *coreIngest {
	return &coreIngest{nc: nc, msgs: pendingMsgs, byts: pendingBytes}
}

func (c *coreIngest) subscribe(subject string, ws []*worker, h func(*nats.Msg)) error {
	sub, err := c.nc.Subscribe(subject, h)
	if err != nil {
		return err
	}
	if c.msgs > 0 || c.byts > 0 {
		if err := sub.SetPendingLimits(orUnlimited(c.msgs), orUnlimited(c.byts)); err != nil {
			_ = sub.Unsubscribe()
			return err
		}
	}
	c.mu.Lock()
	c.subs = append(c.subs, &coreSub{sub: sub, models: ws})
	c.mu.Unlock()
	return nil
}

func orUnlimited(n int) int {
	if n <= 0 {
		return -1
	}
	return n
}

func (c *coreIngest) countDrops() {
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, s := range c.subs {
		n, err := s.sub.Dropped()
		if err != nil || n <= s.dropped {
			continue
		}
		for _, w := range s.models {
			w.mm.SlowConsumerDrops.Add(float64(n - s.dropped))
		}
		s.dropped = n
	}
}

// drain asks the server to stop sending, lets the client deliver what it
// holds, and waits until every subscription is closed. Without a connection
// (nothing can arrive) the subscriptions are simply removed.
func (c *coreIngest) drain(ctx context.Context) error {
	c.countDrops()
	c.mu.Lock()
	subs := append([]*coreSub(nil), c.subs...)
	c.mu.Unlock()
	var errs []error
	for _, s := range subs {
		if !c.nc.IsConnected() {
			_ = s.sub.Unsubscribe()
			continue
		}
		if err := s.sub.Drain(); err != nil {
			_ = s.sub.Unsubscribe()
		}
	}
	poll := time.NewTicker(5 * time.Millisecond)
	defer poll.Stop()
	for _, s := range subs {
		for s.sub.IsValid() {
			select {
			case <-ctx.Done():
				_ = s.sub.Unsubscribe()
				errs = append(errs, fmt.Errorf("daemon: draining %s: %w", s.sub.Subject, ctx.Err()))
			case <-poll.C:
				continue
			}
			break
		}
	}
	return errors.Join(errs...)
}
