// Package natstest starts real NATS servers inside a test process and polls
// for conditions, for the tests of every lariat package that talks to NATS.
// It follows the NATS server's own test harness: loopback, a random port,
// no logs, no signal handling, JetStream in a temporary directory.
// RunCluster joins several such servers by routes into a JetStream cluster
// whose nodes a test can stop and restart.
// PublishAll fills streams fast, each record acknowledged and stored once.
//
// Its functions are safe to call from parallel tests; each server belongs
// to the test that started it and is shut down when that test ends.
package natstest

import (
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
)

// Options returns the default test server options: 127.0.0.1, a random
// port, no logs, no signal handling, JetStream with its store in a
// temporary directory of t.
func Options(t testing.TB) *server.Options {
	t.Helper()
	return &server.Options{
		Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true,
		JetStream: true, StoreDir: t.TempDir(),
	}
}

// RunServer starts a NATS server with o (nil: Options(t)), waits until it
// accepts connections and shuts it down at the end of the test.
func RunServer(t testing.TB, o *server.Options) *server.Server {
	t.Helper()
	if o == nil {
		o = Options(t)
	}
	s, err := server.NewServer(o)
	if err != nil {
		t.Fatal(err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		t.Fatal("NATS server did not start")
	}
	t.Cleanup(s.Shutdown)
	return s
}

// PollEvery is how often WaitFor calls its condition.
const PollEvery = 10 * time.Millisecond

// WaitFor calls f every PollEvery until it returns nil, and fails the test
// with f's last error if total passes first.
func WaitFor(t testing.TB, total time.Duration, f func() error) {
	t.Helper()
	deadline := time.Now().Add(total)
	for {
		err := f()
		if err == nil {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("condition not met within %s: %v", total, err)
		}
		time.Sleep(PollEvery)
	}
}
