package daemon

import (
	"errors"
	"fmt"
	"log/slog"
	"net"
	"path/filepath"
	"strconv"
	"time"

	"github.com/nats-io/nats-server/v2/server"
)

// ErrNotLoopback is returned when the embedded NATS server is asked to listen
// on an address that is not a loopback address.
var ErrNotLoopback = errors.New("daemon: embedded NATS server must listen on a loopback address")

// embeddedOptions returns the server options for an in-process NATS server
// with JetStream on storeDir, listening on listen ("host:port"; port 0 or -1
// picks a free port). Only loopback hosts are accepted: the embedded server
// has no authentication.
func embeddedOptions(listen, storeDir string) (*server.Options, error) {
	host, portStr, err := net.SplitHostPort(listen)
	if err != nil {
		return nil, fmt.Errorf("daemon: embedded NATS listen address %q: %w", listen, err)
	}
	if host == "" || host == "localhost" {
		host = "127.0.0.1"
	}
	ip := net.ParseIP(host)
	if ip == nil || !ip.IsLoopback() {
		return nil, fmt.Errorf("%w: %q", ErrNotLoopback, listen)
	}
	port, err := strconv.Atoi(portStr)
	if err != nil {
		return nil, fmt.Errorf("daemon: embedded NATS port %q: %w", portStr, err)
	}
	if port == 0 {
		port = server.RANDOM_PORT
	}
	return &server.Options{
		ServerName: "lariat-embedded",
		Host:       host,
		Port:       port,
		JetStream:  true,
		StoreDir:   filepath.Join(storeDir, "jetstream"),
		NoSigs:     true, // signals belong to the command, never to a library
		// A large MaxPending keeps the server from cutting off a fast
		// in-process subscriber; the client-side limits are set per subscription.
		MaxPending: 256 << 20,
	}, nil
}

// startEmbedded starts an in-process NATS server and waits until it accepts
// connections. The caller owns the returned server and must Shutdown it.
func startEmbedded(opts *server.Options, log *slog.Logger) (*server.Server, error) {
	s, err := server.NewServer(opts)
	if err != nil {
		return nil, fmt.Errorf("daemon: embedded NATS server: %w", err)
	}
	if log != nil {
		s.SetLogger(serverLogger{log.With("component", "nats-server")}, false, false)
	}
	go s.Start() // owned by s: Shutdown stops every goroutine it started
	if !s.ReadyForConnections(10 * time.Second) {
		s.Shutdown()
		return nil, fmt.Errorf("daemon: embedded NATS server on %s:%d did not start within 10s", opts.Host, opts.Port)
	}
	return s, nil
}

// serverLogger forwards the NATS server's log lines to slog. Notices become
// debug lines (the server is chatty at start) and warnings stay warnings.
type serverLogger struct{ log *slog.Logger }

var _ server.Logger = serverLogger{}

func (l serverLogger) Noticef(format string, v ...any) { l.log.Debug(fmt.Sprintf(format, v...)) }
func (l serverLogger) Warnf(format string, v ...any)   { l.log.Warn(fmt.Sprintf(format, v...)) }
func (l serverLogger) Fatalf(format string, v ...any)  { l.log.Error(fmt.Sprintf(format, v...)) }
func (l serverLogger) Errorf(format string, v ...any)  { l.log.Error(fmt.Sprintf(format, v...)) }
func (l serverLogger) Debugf(format string, v ...any)  { l.log.Debug(fmt.Sprintf(format, v...)) }
func (l serverLogger) Tracef(format string, v ...any)  { l.log.Debug(fmt.Sprintf(format, v...)) }
