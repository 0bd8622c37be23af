package ckptobj

import (
	"bytes"
	"context"
	"errors"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/checkpoint"
	"lariat/sink/natstest"
)

// open starts a NATS server and opens a Bucket on it.
func open(t *testing.T) (*Bucket, jetstream.ObjectStore) {
	t.Helper()
	srv := natstest.RunServer(t, nil)
	nc, err := nats.Connect(srv.ClientURL())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	b, err := Open(ctx, js, Options{Bucket: "ckpt"})
	if err != nil {
		t.Fatal(err)
	}
	obs, err := js.ObjectStore(ctx, "ckpt")
	if err != nil {
		t.Fatal(err)
	}
	return b, obs
}

func frame(payload []byte, sec int64) []byte {
	return checkpoint.Encode(payload, checkpoint.Meta{Arithmetic: checkpoint.AVX2, Written: time.Unix(sec, 0)})
}

// TestBucket: the object store keeps a model's newest two checkpoints
// (Load returns the newest; a damaged newest falls back to the one before
// with the reason; none at all is ErrNotFound), payloads larger than the
// server's 1 MB message limit included. Source: the checkpoint.Store
// contract (sink/checkpoint), no external source.
func TestBucket(t *testing.T) {
	b, obs := open(t)
	if _, _, _, err := b.Load("trip.p07"); !errors.Is(err, checkpoint.ErrNotFound) {
		t.Fatalf("empty bucket: %v, want ErrNotFound", err)
	}
	big := bytes.Repeat([]byte("0123456789abcdef"), 200_000) // 3.2 MB
	payloads := [][]byte{[]byte("first"), big, []byte("third")}
	for i, p := range payloads {
		if err := b.Save("trip.p07", frame(p, int64(i+1))); err != nil {
			t.Fatal(err)
		}
		got, m, skipped, err := b.Load("trip.p07")
		if err != nil || len(skipped) > 0 || !bytes.Equal(got, p) || m.Written.Unix() != int64(i+1) {
			t.Fatalf("after save %d: %d bytes, %v, skipped %v, err %v", i, len(got), m, skipped, err)
		}
	}
	// Another model is separate.
	if _, _, _, err := b.Load("trip.p08"); !errors.Is(err, checkpoint.ErrNotFound) {
		t.Errorf("other model: %v", err)
	}
	// Damage the newest ("third"): the one before (big) is returned.
	s, err := b.slots(context.Background(), "trip.p07")
	if err != nil {
		t.Fatal(err)
	}
	bad := frame([]byte("third"), 3)
	bad[len(bad)-1] ^= 0xff
	meta := jetstream.ObjectMeta{Name: s[0].name, Metadata: map[string]string{genKey: "99"}}
	if _, err := obs.Put(context.Background(), meta, bytes.NewReader(bad)); err != nil {
		t.Fatal(err)
	}
	got, _, skipped, err := b.Load("trip.p07")
	if err != nil || !bytes.Equal(got, big) || len(skipped) != 1 || !errors.Is(skipped[0], checkpoint.ErrCorrupt) {
		t.Errorf("damaged newest: %d bytes, skipped %v, err %v; want the one before", len(got), skipped, err)
	}
	// The next save replaces the older slot (big), keeping the damaged
	// one's generation below it.
	if err := b.Save("trip.p07", frame([]byte("fourth"), 4)); err != nil {
		t.Fatal(err)
	}
	if got, _, _, err := b.Load("trip.p07"); err != nil || string(got) != "fourth" {
		t.Errorf("after the damage: %q, %v", got, err)
	}
	// Both damaged: an error that is not ErrNotFound, with both reasons.
	for _, sl := range []string{"trip.p07.a", "trip.p07.b"} {
		if _, err := obs.PutBytes(context.Background(), sl, []byte("junk")); err != nil {
			t.Fatal(err)
		}
	}
	_, _, skipped, err = b.Load("trip.p07")
	if err == nil || errors.Is(err, checkpoint.ErrNotFound) || len(skipped) != 2 {
		t.Errorf("both damaged: skipped %v, err %v", skipped, err)
	}
}

// TestBucketShared: a checkpoint saved through one connection is read
// through another (what a process taking over a model does).
func TestBucketShared(t *testing.T) {
	srv := natstest.RunServer(t, nil)
	var bs []*Bucket
	for range 2 {
		nc, err := nats.Connect(srv.ClientURL())
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(nc.Close)
		js, _ := jetstream.New(nc)
		b, err := Open(context.Background(), js, Options{Bucket: "shared"})
		if err != nil {
			t.Fatal(err)
		}
		bs = append(bs, b)
	}
	if err := bs[0].Save("m", frame([]byte("state"), 1)); err != nil {
		t.Fatal(err)
	}
	if got, _, _, err := bs[1].Load("m"); err != nil || string(got) != "state" {
		t.Errorf("read by the other process: %q, %v", got, err)
	}
}

func TestOpenNoName(t *testing.T) {
	if _, err := Open(context.Background(), nil, Options{}); err == nil {
		t.Error("no error without a bucket name")
	}
}
