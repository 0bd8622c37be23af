// Package deploy_test checks the deployment example in this directory: every
// lariat configuration loads and validates with the project's own loader,
// every NATS server configuration parses with the server's own parser, the
// two agree (URLs, user, replicas), and a cluster started from the server
// files' accounts and route credentials takes what lariat and the sensors
// do there and refuses what they may not.
package deploy_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"maps"
	"net"
	"net/url"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"lariat/config"
	"lariat/sink/natstest"
)

// nodes is the number of nodes, NATS servers and lariat processes alike.
const nodes = 3

// lariatFiles returns the lariat configuration files, sorted.
func lariatFiles(t *testing.T) []string {
	t.Helper()
	files, err := filepath.Glob("lariat/*.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) != nodes {
		t.Fatalf("lariat configurations %v, want %d", files, nodes)
	}
	return files
}

// natsFile returns the server configuration of node i (0-based).
func natsFile(i int) string { return fmt.Sprintf("nats/nats-%d.conf", i+1) }

// natsOptions parses node i's server configuration.
func natsOptions(t *testing.T, i int) *server.Options {
	t.Helper()
	o, err := server.ProcessConfigFile(natsFile(i))
	if err != nil {
		t.Fatalf("%s: %v", natsFile(i), err)
	}
	return o
}

// clientURLs returns the client URL of every node the server files
// describe: each route's host with the client port of the node's file.
func clientURLs(t *testing.T) []string {
	t.Helper()
	var urls []string
	for i := range nodes {
		o := natsOptions(t, i)
		if i >= len(o.Routes) {
			t.Fatalf("%s: %d routes", natsFile(i), len(o.Routes))
		}
		urls = append(urls, fmt.Sprintf("nats://%s", net.JoinHostPort(o.Routes[i].Hostname(), fmt.Sprint(o.Port))))
	}
	return urls
}

// TestLariatConfigs loads every lariat configuration with config.Load
// (decode, defaults, validation), checks what the deployment relies on,
// and runs config.Check with the secrets the README tells to create.
func TestLariatConfigs(t *testing.T) {
	want := clientURLs(t)
	for i, file := range lariatFiles(t) {
		t.Run(filepath.Base(file), func(t *testing.T) {
			c, err := config.Load(file)
			if err != nil {
				t.Fatal(err)
			}
			urls := strings.Split(c.NATS.URL, ",")
			if !slices.Equal(sorted(urls), sorted(want)) {
				t.Errorf("nats.url %v, want the three nodes %v", urls, want)
			}
			if urls[0] != want[i] {
				t.Errorf("nats.url starts with %s, want the local node %s", urls[0], want[i])
			}
			if c.NATS.User != "lariat" || c.NATS.PasswordFile == "" {
				t.Errorf("nats user %q password_file %q, want user lariat with a password file", c.NATS.User, c.NATS.PasswordFile)
			}
			if c.Intake.Mode != config.IntakeDurable {
				t.Errorf("intake.mode %q, want durable", c.Intake.Mode)
			}
			if c.Checkpoint.Store != config.CheckpointBucket || c.Checkpoint.Replicas != nodes {
				t.Errorf("checkpoint store %q replicas %d, want bucket and %d", c.Checkpoint.Store, c.Checkpoint.Replicas, nodes)
			}
			if host, _, err := net.SplitHostPort(c.HTTP.Listen); err != nil || !net.ParseIP(host).IsLoopback() {
				t.Errorf("http.listen %q is not on loopback", c.HTTP.Listen)
			}
			if len(c.Models) == 0 || !c.Models[0].Template() {
				t.Errorf("want a template model entry first, got %d models", len(c.Models))
			}
			if len(c.Models) > 0 {
				if in := c.Models[0].Instances; in.Partitions < nodes || in.Partitions%nodes != 0 || in.Takeover.Std() <= 0 {
					t.Errorf("instances.partitions %d takeover %v, want a multiple of the %d processes sharing the template and a takeover", in.Partitions, in.Takeover, nodes)
				}
			}

			dir := t.TempDir()
			c.NATS.PasswordFile = writeFile(t, dir, "nats.password", "not-the-real-one\n")
			c.HTTP.AdminTokenFile = writeFile(t, dir, "admin.token", "not-the-real-one\n")
			c.DataDir = filepath.Join(dir, "data")
			if err := c.Check(); err != nil {
				t.Errorf("check with the secrets in place: %v", err)
			}
		})
	}
}

// TestLariatConfigsAlike checks that the three lariat files differ only in
// their first comment line and the order of nats.url, so that a change
// made to one is not forgotten in the others.
func TestLariatConfigsAlike(t *testing.T) {
	var first []byte
	for _, file := range lariatFiles(t) {
		data, err := os.ReadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		var kept [][]byte
		for j, line := range bytes.Split(data, []byte("\n")) {
			if j > 0 && !bytes.HasPrefix(bytes.TrimSpace(line), []byte("url:")) {
				kept = append(kept, line)
			}
		}
		got := bytes.Join(kept, []byte("\n"))
		if first == nil {
			first = got
		} else if !bytes.Equal(got, first) {
			t.Errorf("%s differs from %s in more than its first line and the order of nats.url", file, lariatFiles(t)[0])
		}
	}
}

// TestNATSConfigsAlike checks that the three server files differ only in
// their first comment line and server_name, as their comments say.
func TestNATSConfigsAlike(t *testing.T) {
	var first []byte
	for i := range nodes {
		data, err := os.ReadFile(natsFile(i))
		if err != nil {
			t.Fatal(err)
		}
		var kept [][]byte
		for j, line := range bytes.Split(data, []byte("\n")) {
			if j > 0 && !bytes.HasPrefix(line, []byte("server_name:")) {
				kept = append(kept, line)
			}
		}
		got := bytes.Join(kept, []byte("\n"))
		if first == nil {
			first = got
		} else if !bytes.Equal(got, first) {
			t.Errorf("%s differs from %s in more than its first line and server_name", natsFile(i), natsFile(0))
		}
	}
}

// TestNATSConfigs parses every server configuration with the server's own
// parser and checks that they make one cluster.
func TestNATSConfigs(t *testing.T) {
	first := natsOptions(t, 0)
	for i := range nodes {
		o := natsOptions(t, i)
		if want := fmt.Sprintf("nats-%d", i+1); o.ServerName != want {
			t.Errorf("%s: server_name %q, want %q", natsFile(i), o.ServerName, want)
		}
		if !o.JetStream || o.StoreDir == "" {
			t.Errorf("%s: JetStream %v store %q", natsFile(i), o.JetStream, o.StoreDir)
		}
		if o.Cluster.Name == "" || o.Cluster.Name != first.Cluster.Name {
			t.Errorf("%s: cluster name %q, node 1 has %q", natsFile(i), o.Cluster.Name, first.Cluster.Name)
		}
		if got, want := routeStrings(o), routeStrings(first); len(got) != nodes || !slices.Equal(got, want) {
			t.Errorf("%s: routes %v, node 1 has %v", natsFile(i), got, want)
		}
		if o.Cluster.Username == "" || o.Cluster.Password == "" {
			t.Errorf("%s: routes without authorization", natsFile(i))
		}
		if o.HTTPHost != "127.0.0.1" {
			t.Errorf("%s: monitoring on %q, want loopback", natsFile(i), o.HTTPHost)
		}
		if o.SystemAccount == "" {
			t.Errorf("%s: no system account", natsFile(i))
		}
		if u := user(o, "lariat"); u == nil || u.Account == nil || u.Permissions != nil {
			t.Errorf("%s: user lariat %+v, want one in an account, without restrictions", natsFile(i), u)
		}
		if u := user(o, "sensors"); u == nil || u.Permissions == nil || u.Account != user(o, "lariat").Account {
			t.Errorf("%s: user sensors %+v, want one with permissions in lariat's account", natsFile(i), u)
		}
	}
}

// TestDeployCluster starts a three-node cluster on loopback with the server
// files' accounts, users and route credentials (addresses and stores are
// the test's own), and checks as lariat what lariat does there (an object
// store and a stream with three replicas), and as the sensors what they
// may do (publish a record with acknowledgement) and may not (publish
// under lariat's prefix, read the plant's subjects, connect without a
// password).
func TestDeployCluster(t *testing.T) {
	lc, err := config.Load(lariatFiles(t)[0])
	if err != nil {
		t.Fatal(err)
	}
	c, fileOpts := startCluster(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()

	if nc, err := nats.Connect(c.URL(0)); err == nil {
		nc.Close()
		t.Error("a client without user and password was let in")
	}

	lariat := user(fileOpts[0], lc.NATS.User)
	ljs := connect(t, c.ConnectURL(), lariat.Username, lariat.Password, nil)
	obs, err := ljs.CreateObjectStore(ctx, jetstream.ObjectStoreConfig{
		Bucket: lc.Checkpoint.Bucket, Replicas: lc.Checkpoint.Replicas, Storage: jetstream.FileStorage,
	})
	if err != nil {
		t.Fatalf("lariat creates its checkpoint bucket: %v", err)
	}
	if _, err := obs.PutBytes(ctx, "trip.p07.a", []byte("state")); err != nil {
		t.Fatal(err)
	}
	m := lc.Models[0]
	stream := lc.Intake.StreamPrefix + "_" + m.Name
	if _, err := ljs.CreateStream(ctx, jetstream.StreamConfig{
		Name: stream, Subjects: []string{m.Subject}, Replicas: nodes, Storage: jetstream.FileStorage,
	}); err != nil {
		t.Fatalf("lariat creates the intake stream: %v", err)
	}

	sensors := user(fileOpts[0], "sensors")
	denied := make(chan error, 8)
	sjs := connect(t, c.URL(1), sensors.Username, sensors.Password, denied)
	subject := strings.Replace(m.Subject, "*", "p07", 1)
	ack, err := sjs.Publish(ctx, subject, []byte(`{"x":{"flow_m3h":41.5},"y":0}`))
	if err != nil {
		t.Fatalf("sensors publish %s: %v", subject, err)
	}
	if ack.Stream != stream {
		t.Errorf("record went to stream %q, want %q", ack.Stream, stream)
	}
	info, err := ljs.Stream(ctx, stream)
	if err != nil {
		t.Fatal(err)
	}
	if n := info.CachedInfo().State.Msgs; n != 1 {
		t.Errorf("stream holds %d records, want 1", n)
	}

	// The server reports each refusal asynchronously, naming the
	// operation and the subject.
	forbidden := lc.SubjectPrefix + ".model." + m.Name + ".p07"
	want := map[string]bool{
		fmt.Sprintf("Publish to %q", forbidden):      true,
		fmt.Sprintf("Subscription to %q", "plant.>"): true,
	}
	sjs.Conn().Publish(forbidden, []byte("{}"))
	sjs.Conn().Subscribe("plant.>", func(*nats.Msg) {})
	sjs.Conn().Flush()
	for len(want) > 0 {
		select {
		case err := <-denied:
			if !errors.Is(err, nats.ErrPermissionViolation) {
				t.Errorf("sensors: %v, want a permissions violation", err)
			}
			for w := range want {
				if strings.Contains(err.Error(), w) {
					delete(want, w)
				}
			}
		case <-time.After(30 * time.Second):
			t.Fatalf("sensors were not refused: %v", slices.Collect(maps.Keys(want)))
		}
	}
}

// startCluster starts a cluster of nodes servers on loopback with the
// accounts, users and route credentials of the server files, and returns it
// with the files' options.
func startCluster(t *testing.T) (*natstest.Cluster, []*server.Options) {
	t.Helper()
	fileOpts := make([]*server.Options, nodes)
	for i := range nodes {
		fileOpts[i] = natsOptions(t, i)
	}
	c := natstest.RunClusterWith(t, nodes, &natstest.ClusterOptions{
		Name:   fileOpts[0].Cluster.Name,
		Modify: func(i int, o *server.Options) { fromFile(t, i, o) },
	})
	return c, fileOpts
}

// fromFile copies node i's accounts, users and route credentials from its
// server file into o, whose addresses and store are the test's.
func fromFile(t *testing.T, i int, o *server.Options) {
	f, err := server.ProcessConfigFile(natsFile(i))
	if err != nil {
		t.Errorf("%s: %v", natsFile(i), err)
		return
	}
	o.ServerName = f.ServerName
	o.Accounts, o.Users, o.SystemAccount = f.Accounts, f.Users, f.SystemAccount
	o.Cluster.Username, o.Cluster.Password = f.Cluster.Username, f.Cluster.Password
	for _, r := range o.Routes {
		r.User = url.UserPassword(f.Cluster.Username, f.Cluster.Password)
	}
}

// connect connects as user through urls and returns a JetStream context;
// asynchronous errors (permission violations) go to errs if it is not nil.
func connect(t *testing.T, urls, name, password string, errs chan<- error) jetstream.JetStream {
	t.Helper()
	opts := []nats.Option{nats.UserInfo(name, password)}
	if errs != nil {
		opts = append(opts, nats.ErrorHandler(func(_ *nats.Conn, _ *nats.Subscription, err error) {
			select {
			case errs <- err:
			default:
			}
		}))
	}
	nc, err := nats.Connect(urls, opts...)
	if err != nil {
		t.Fatalf("connect as %s: %v", name, err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return js
}

// user returns the user called name in o, or nil.
func user(o *server.Options, name string) *server.User {
	for _, u := range o.Users {
		if u.Username == name {
			return u
		}
	}
	return nil
}

// routeStrings returns o's routes as strings.
func routeStrings(o *server.Options) []string {
	var rs []string
	for _, r := range o.Routes {
		rs = append(rs, r.String())
	}
	return rs
}

// sorted returns a sorted copy of s.
func sorted(s []string) []string {
	s = slices.Clone(s)
	slices.Sort(s)
	return s
}

// writeFile writes data to dir/name and returns the path.
func writeFile(t *testing.T, dir, name, data string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(data), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}
