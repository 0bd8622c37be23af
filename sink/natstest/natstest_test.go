package natstest_test

import (
	"errors"
	"testing"
	"time"

	"github.com/nats-io/nats.go"

	"lariat/sink/natstest"
)

// TestRunServer starts a server and polls until a subscriber got a message
// published after it subscribed.
func TestRunServer(t *testing.T) {
	s := natstest.RunServer(t, nil)
	nc, err := nats.Connect(s.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	defer nc.Close()
	got := make(chan *nats.Msg, 1)
	if _, err := nc.ChanSubscribe("t.x", got); err != nil {
		t.Fatal(err)
	}
	nc.Flush()
	if err := nc.Publish("t.x", []byte("hi")); err != nil {
		t.Fatal(err)
	}
	natstest.WaitFor(t, 5*time.Second, func() error {
		if len(got) == 0 {
			return errors.New("nothing received")
		}
		return nil
	})
	if m := <-got; string(m.Data) != "hi" {
		t.Errorf("received %q", m.Data)
	}
	if !s.JetStreamEnabled() {
		t.Error("JetStream off in the default options")
	}
}
