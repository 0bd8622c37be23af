package natstest_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/natstest"
)

// connectJS connects a client to url and returns its JetStream context; the
// connection closes at the end of the test.
func connectJS(t testing.TB, url string) jetstream.JetStream {
	t.Helper()
	nc, err := nats.Connect(url)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return js
}

// TestRunCluster creates a stream and a key-value bucket with three replicas
// through node 0, writes through node 1, stops the node that leads the
// stream, and checks that the two others still take and serve messages and
// keys; then it restarts the stopped node on its store and waits until its
// replica is current again.
func TestRunCluster(t *testing.T) {
	c := natstest.RunCluster(t, 3)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()

	js0 := connectJS(t, c.URL(0))
	st, err := js0.CreateStream(ctx, jetstream.StreamConfig{
		Name: "T", Subjects: []string{"t.>"}, Replicas: 3, Storage: jetstream.FileStorage,
	})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := js0.CreateKeyValue(ctx, jetstream.KeyValueConfig{Bucket: "kv", Replicas: 3}); err != nil {
		t.Fatal(err)
	}

	js1 := connectJS(t, c.URL(1))
	const before, after = 10, 10
	for i := range before {
		if _, err := js1.Publish(ctx, "t.x", fmt.Appendf(nil, "m%d", i)); err != nil {
			t.Fatal(err)
		}
	}
	kv1, err := js1.KeyValue(ctx, "kv")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := kv1.Put(ctx, "pump-7", []byte("v1")); err != nil {
		t.Fatal(err)
	}

	info, err := st.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if info.Cluster == nil || info.Cluster.Leader == "" || len(info.Cluster.Replicas) != 2 {
		t.Fatalf("stream cluster info %+v: want a leader and two replicas", info.Cluster)
	}
	down := c.Index(info.Cluster.Leader)
	if down < 0 {
		t.Fatalf("stream leader %q is no node of the cluster", info.Cluster.Leader)
	}
	c.Shutdown(down)
	c.WaitReady()
	live := (down + 1) % c.N()
	jsL := connectJS(t, c.URL(live))

	// The first publish after the leader stopped waits for the election of
	// a new stream leader among the two others.
	eventually(t, func() (*jetstream.PubAck, error) {
		pctx, pcancel := context.WithTimeout(ctx, 2*time.Second)
		defer pcancel()
		return jsL.Publish(pctx, "t.x", []byte("m10"), jetstream.WithMsgID("10"))
	})
	// Sent again after an error, a message is stored once (its ID).
	for i := before + 1; i < before+after; i++ {
		eventually(t, func() (*jetstream.PubAck, error) {
			return jsL.Publish(ctx, "t.x", fmt.Appendf(nil, "m%d", i), jetstream.WithMsgID(fmt.Sprint(i)))
		})
	}
	got := eventually(t, func() (string, error) { return readAll(ctx, jsL, before+after) })
	if want := wantMessages(before + after); got != want {
		t.Errorf("messages after node %d stopped:\n got %s\nwant %s", down, got, want)
	}
	e := eventually(t, func() (jetstream.KeyValueEntry, error) {
		kvL, err := jsL.KeyValue(ctx, "kv")
		if err != nil {
			return nil, err
		}
		return kvL.Get(ctx, "pump-7")
	})
	if string(e.Value()) != "v1" {
		t.Errorf("key read through node %d: %q, want v1", live, e.Value())
	}

	c.Restart(down)
	natstest.WaitFor(t, natstest.ClusterReady, func() error {
		info, err := st.Info(ctx)
		if err != nil {
			return err
		}
		if n := len(info.Cluster.Replicas); n != 2 {
			return fmt.Errorf("%d replicas besides the leader", n)
		}
		for _, r := range info.Cluster.Replicas {
			if !r.Current || r.Offline {
				return fmt.Errorf("replica %s not current", r.Name)
			}
		}
		return nil
	})
}

// TestRunClusterSizes forms clusters of two and four nodes and publishes to
// a stream with a replica on each node (at most three) through the last
// node.
func TestRunClusterSizes(t *testing.T) {
	for _, n := range []int{2, 4} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			c := natstest.RunCluster(t, n)
			if got := len(c.URLs()); got != n {
				t.Fatalf("%d client URLs", got)
			}
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			js := connectJS(t, c.ConnectURL())
			if _, err := js.CreateStream(ctx, jetstream.StreamConfig{
				Name: "T", Subjects: []string{"t.>"}, Replicas: min(n, 3),
			}); err != nil {
				t.Fatal(err)
			}
			jsLast := connectJS(t, c.URL(n-1))
			ack, err := jsLast.Publish(ctx, "t.x", []byte("m0"))
			if err != nil {
				t.Fatal(err)
			}
			if ack.Stream != "T" || ack.Sequence != 1 {
				t.Errorf("ack %+v, want stream T sequence 1", ack)
			}
			if got := eventually(t, func() (string, error) { return readAll(ctx, jsLast, 1) }); got != "m0" {
				t.Errorf("read %q", got)
			}
		})
	}
}

// readAll reads the first n messages of stream T with an ordered consumer
// and returns their payloads joined by spaces.
func readAll(ctx context.Context, js jetstream.JetStream, n int) (string, error) {
	cons, err := js.OrderedConsumer(ctx, "T", jetstream.OrderedConsumerConfig{})
	if err != nil {
		return "", err
	}
	var got []string
	for len(got) < n {
		batch, err := cons.Fetch(n-len(got), jetstream.FetchMaxWait(5*time.Second))
		if err != nil {
			return "", err
		}
		for m := range batch.Messages() {
			got = append(got, string(m.Data()))
		}
		if err := batch.Error(); err != nil && !errors.Is(err, nats.ErrTimeout) {
			return "", err
		}
	}
	return strings.Join(got, " "), nil
}

// eventually returns what f returns once it succeeds, polling for as long
// as a cluster may take to settle after a node left; a client of a cluster
// retries its requests the same way.
func eventually[T any](t *testing.T, f func() (T, error)) T {
	t.Helper()
	var v T
	natstest.WaitFor(t, natstest.ClusterReady, func() error {
		var err error
		v, err = f()
		return err
	})
	return v
}

// wantMessages is the payloads m0 … m(n-1) joined by spaces.
func wantMessages(n int) string {
	w := make([]string, n)
	for i := range w {
		w[i] = fmt.Sprintf("m%d", i)
	}
	return strings.Join(w, " ")
}
