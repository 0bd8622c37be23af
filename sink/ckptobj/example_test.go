package ckptobj_test

import (
	"context"
	"fmt"
	"os"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/sink/checkpoint"
	"lariat/sink/ckptobj"
)

// A checkpoint saved by one process is loaded by whichever process takes
// the model over.
func Example() {
	dir, srv := tempServer()
	defer os.RemoveAll(dir)
	defer srv.Shutdown()
	nc, err := nats.Connect(srv.ClientURL())
	if err != nil {
		fmt.Println(err)
		return
	}
	defer nc.Close()
	js, _ := jetstream.New(nc)
	b, err := ckptobj.Open(context.Background(), js, ckptobj.Options{Bucket: "lariat_checkpoints"})
	if err != nil {
		fmt.Println(err)
		return
	}
	frame := checkpoint.Encode([]byte("pipeline state"), checkpoint.Meta{Arithmetic: checkpoint.Portable, Written: time.Now()})
	if err := b.Save("trip.p07", frame); err != nil {
		fmt.Println(err)
		return
	}
	payload, meta, _, err := b.Load("trip.p07")
	fmt.Println(string(payload), meta.Arithmetic, err)
	// Output: pipeline state portable <nil>
}

// tempServer starts an embedded NATS server with JetStream in a temporary
// directory.
func tempServer() (string, *server.Server) {
	dir, err := os.MkdirTemp("", "ckptobj")
	if err != nil {
		panic(err)
	}
	s, err := server.NewServer(&server.Options{Host: "127.0.0.1", Port: -1, NoLog: true, NoSigs: true, JetStream: true, StoreDir: dir})
	if err != nil {
		panic(err)
	}
	go s.Start()
	s.ReadyForConnections(10 * time.Second)
	return dir, s
}
