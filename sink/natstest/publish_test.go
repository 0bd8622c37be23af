package natstest_test

import (
	"context"
	"fmt"
	"strconv"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/natstest"
)

// keyed returns record i of a stream of records spread over keys keys:
// subject k.<key>, payload the decimal i.
func keyed(keys int) func(i int) (string, []byte) {
	return func(i int) (string, []byte) {
		return "k.p" + strconv.Itoa(i%keys), strconv.AppendInt(nil, int64(i), 10)
	}
}

// setupStream connects to url and creates stream K over k.* with replicas
// replicas.
func setupStream(t testing.TB, url string, replicas int) (*nats.Conn, jetstream.Stream) {
	t.Helper()
	js := connectJS(t, url)
	nc := js.Conn()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	st, err := js.CreateStream(ctx, jetstream.StreamConfig{
		Name: "K", Subjects: []string{"k.*"}, Replicas: replicas, Storage: jetstream.FileStorage,
	})
	if err != nil {
		t.Fatal(err)
	}
	return nc, st
}

// storedOrder reads every message of stream K in stream order and returns
// the record numbers of their payloads.
func storedOrder(ctx context.Context, nc *nats.Conn) ([]int, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, err
	}
	st, err := js.Stream(ctx, "K")
	if err != nil {
		return nil, err
	}
	n := int(st.CachedInfo().State.Msgs)
	cons, err := js.OrderedConsumer(ctx, "K", jetstream.OrderedConsumerConfig{})
	if err != nil {
		return nil, err
	}
	var got []int
	for len(got) < n {
		batch, err := cons.Fetch(min(n-len(got), 1000), jetstream.FetchMaxWait(5*time.Second))
		if err != nil {
			return nil, err
		}
		for m := range batch.Messages() {
			i, err := strconv.Atoi(string(m.Data()))
			if err != nil {
				return nil, fmt.Errorf("payload %q", m.Data())
			}
			got = append(got, i)
		}
	}
	return got, nil
}

// TestPublishAll publishes keyed records to one server, checks they are
// stored once each and in order, and publishes them again with the same
// message IDs: every one is acknowledged as a duplicate and nothing is
// stored twice.
func TestPublishAll(t *testing.T) {
	s := natstest.RunServer(t, nil)
	nc, _ := setupStream(t, s.ClientURL(), 1)
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	const n = 3000
	o := &natstest.PublishOptions{Window: 64, IDPrefix: "run1"}
	res, err := natstest.PublishAll(ctx, nc, n, keyed(50), o)
	if err != nil {
		t.Fatal(err)
	}
	if res.Records != n || res.Duplicates != 0 || res.First != 1 || res.Last != n {
		t.Errorf("first run: %+v, want %d records in sequences 1..%d", res, n, n)
	}
	got := eventually(t, func() ([]int, error) { return storedOrder(ctx, nc) })
	for i, r := range got {
		if r != i {
			t.Fatalf("stream position %d holds record %d", i, r)
		}
	}
	if len(got) != n {
		t.Errorf("stream holds %d records, want %d", len(got), n)
	}

	again, err := natstest.PublishAll(ctx, nc, n, keyed(50), o)
	if err != nil {
		t.Fatal(err)
	}
	if again.Records != n || again.Duplicates != n {
		t.Errorf("second run with the same IDs: %+v, want %d duplicates", again, n)
	}
	if got := eventually(t, func() ([]int, error) { return storedOrder(ctx, nc) }); len(got) != n {
		t.Errorf("after the second run the stream holds %d records, want %d", len(got), n)
	}
}

// TestPublishAllFailover publishes to a stream with three replicas and stops
// the node that leads it a third of the way through: the publisher gets
// past the election and every record is stored exactly once. (Whether
// records in flight fail, and are sent again, depends on the timing; the
// log shows it.)
func TestPublishAllFailover(t *testing.T) {
	c := natstest.RunCluster(t, 3)
	_, st := setupStream(t, c.URL(0), 3)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	info, err := st.Info(ctx)
	if err != nil {
		t.Fatal(err)
	}
	leader := c.Index(info.Cluster.Leader)
	if leader < 0 {
		t.Fatalf("stream leader %q is no node", info.Cluster.Leader)
	}
	// The publisher connects to a node that stays, through every URL.
	pub, err := nats.Connect(c.URL((leader+1)%c.N()), nats.MaxReconnects(-1))
	if err != nil {
		t.Fatal(err)
	}
	defer pub.Close()

	// The publisher pauses before record n/3 until the leader is gone.
	const n = 6000
	third, stopped := make(chan struct{}), make(chan struct{})
	var once sync.Once
	gen := keyed(50)
	msg := func(i int) (string, []byte) {
		if i == n/3 {
			once.Do(func() {
				close(third)
				<-stopped
			})
		}
		return gen(i)
	}
	type outcome struct {
		res natstest.PublishResult
		err error
	}
	done := make(chan outcome, 1)
	go func() {
		res, err := natstest.PublishAll(ctx, pub, n, msg, &natstest.PublishOptions{AckWait: 2 * time.Second})
		done <- outcome{res, err}
	}()
	<-third
	c.Shutdown(leader)
	close(stopped)
	out := <-done
	if out.err != nil {
		t.Fatal(out.err)
	}
	t.Logf("%+v", out.res)
	if out.res.Records != n {
		t.Errorf("%d records acknowledged, want %d", out.res.Records, n)
	}
	check, err := nats.Connect(c.URL((leader + 1) % c.N()))
	if err != nil {
		t.Fatal(err)
	}
	defer check.Close()
	seen := make([]int, n)
	for _, r := range eventually(t, func() ([]int, error) { return storedOrder(ctx, check) }) {
		if r < 0 || r >= n {
			t.Fatalf("record %d stored", r)
		}
		seen[r]++
	}
	for i, k := range seen {
		if k != 1 {
			t.Errorf("record %d stored %d times", i, k)
		}
	}
}

// BenchmarkPublishAll publishes keyed records (50 keys, small payloads) with
// a window of 256: to one server (the baseline), and to a three-node cluster
// with one and with three replicas (the client connects to any node).
func BenchmarkPublishAll(b *testing.B) {
	cases := []struct {
		name            string
		nodes, replicas int
	}{
		{"server/R1", 1, 1},
		{"cluster3/R1", 3, 1},
		{"cluster3/R3", 3, 3},
	}
	for _, bc := range cases {
		b.Run(bc.name, func(b *testing.B) {
			url := ""
			if bc.nodes == 1 {
				url = natstest.RunServer(b, nil).ClientURL()
			} else {
				url = natstest.RunCluster(b, bc.nodes).ConnectURL()
			}
			nc, _ := setupStream(b, url, bc.replicas)
			ctx := context.Background()
			b.ResetTimer()
			res, err := natstest.PublishAll(ctx, nc, b.N, keyed(50), nil)
			b.StopTimer()
			if err != nil {
				b.Fatal(err)
			}
			if res.Records != b.N {
				b.Fatalf("%d of %d records", res.Records, b.N)
			}
			b.ReportMetric(float64(b.N)/res.Elapsed.Seconds(), "records/s")
		})
	}
}
