package natstest

import (
	"errors"
	"fmt"
	"net"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
)

// ClusterReady is how long RunCluster and Cluster.Restart wait for the
// routes and the JetStream meta leader. It is generous: a JetStream cluster
// elects its meta leader after a randomized election timeout of several
// seconds, and a loaded machine stretches that.
const ClusterReady = 60 * time.Second

// ClusterOptions tunes RunClusterWith. The zero value (or nil) gives the
// defaults.
type ClusterOptions struct {
	// Name is the cluster name; default "lariat-test".
	Name string
	// Modify, if set, changes node i's options after the defaults are
	// filled in (accounts, subject mappings, limits). It is called again
	// with fresh options when a node restarts.
	Modify func(i int, o *server.Options)
}

// Cluster is a set of embedded NATS servers joined by routes on loopback,
// each with JetStream and a store of its own. Its methods may be called
// from the test's goroutine and from others; Server and URLs reflect
// restarts.
type Cluster struct {
	// Name is the cluster name every node carries.
	Name string

	t      testing.TB
	base   string // parent of the nodes' stores, removed after every node stopped
	modify func(int, *server.Options)
	routes []string // nats-route:// URLs of every node's cluster listener

	mu    sync.Mutex
	nodes []clusterNode
}

// clusterNode is what a node keeps across a restart.
type clusterNode struct {
	srv         *server.Server
	store       string
	clientPort  int
	clusterPort int
	running     bool
}

// RunCluster starts n NATS servers (n >= 2) on random loopback client and
// cluster ports, joined by routes, with JetStream on each (a store of its
// own in a temporary directory of t), waits until the cluster is formed and
// JetStream has a meta leader that every node follows, and shuts every node
// down at the end of the test.
func RunCluster(t testing.TB, n int) *Cluster {
	t.Helper()
	return RunClusterWith(t, n, nil)
}

// RunClusterWith is RunCluster with options (nil: the defaults).
func RunClusterWith(t testing.TB, n int, o *ClusterOptions) *Cluster {
	t.Helper()
	if n < 2 {
		t.Fatalf("natstest: a cluster of %d nodes (one server is RunServer)", n)
	}
	if o == nil {
		o = &ClusterOptions{}
	}
	// The stores' parent directory is made before the shutdown is
	// registered: cleanups run last-registered first, so the nodes stop
	// (and stop writing) before their stores are removed.
	c := &Cluster{Name: o.Name, t: t, base: t.TempDir(), modify: o.Modify}
	if c.Name == "" {
		c.Name = "lariat-test"
	}
	t.Cleanup(c.shutdownAll)
	// The cluster ports are reserved by binding them and released just
	// before the servers bind them again, so another process may take one
	// in between; a node that cannot listen is reported by
	// ReadyForConnections, and the whole start is tried again.
	var err error
	for try := 0; try < 3; try++ {
		if err = c.start(n); err == nil {
			break
		}
		c.shutdownAll()
		c.mu.Lock()
		c.nodes = nil
		c.mu.Unlock()
	}
	if err != nil {
		t.Fatalf("natstest: cluster did not start: %v", err)
	}
	c.WaitReady()
	return c
}

// start reserves the cluster ports and starts every node.
func (c *Cluster) start(n int) error {
	ports, err := freePorts(n)
	if err != nil {
		return err
	}
	c.routes = make([]string, n)
	for i, p := range ports {
		c.routes[i] = fmt.Sprintf("nats-route://127.0.0.1:%d", p)
	}
	nodes := make([]clusterNode, n)
	for i := range nodes {
		store, err := os.MkdirTemp(c.base, "node")
		if err != nil {
			return err
		}
		nodes[i] = clusterNode{store: store, clientPort: -1, clusterPort: ports[i]}
	}
	c.mu.Lock()
	c.nodes = nodes
	c.mu.Unlock()
	for i := range n {
		if err := c.startNode(i); err != nil {
			return err
		}
	}
	return nil
}

// freePorts binds n loopback ports at once, so that they differ, and
// releases them.
func freePorts(n int) ([]int, error) {
	ls := make([]net.Listener, 0, n)
	defer func() {
		for _, l := range ls {
			l.Close()
		}
	}()
	ports := make([]int, n)
	for i := range ports {
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			return nil, err
		}
		ls = append(ls, l)
		ports[i] = l.Addr().(*net.TCPAddr).Port
	}
	return ports, nil
}

// nodeOptions builds node i's options from scratch.
func (c *Cluster) nodeOptions(i int, nd clusterNode) *server.Options {
	o := &server.Options{
		ServerName: fmt.Sprintf("%s-%d", c.Name, i),
		Host:       "127.0.0.1", Port: nd.clientPort,
		NoLog: true, NoSigs: true,
		JetStream: true, StoreDir: nd.store,
		Cluster: server.ClusterOpts{
			Name: c.Name, Host: "127.0.0.1", Port: nd.clusterPort,
		},
		Routes: server.RoutesFromStr(strings.Join(c.routes, ",")),
	}
	if c.modify != nil {
		c.modify(i, o)
	}
	return o
}

// startNode starts node i with its recorded ports and store.
func (c *Cluster) startNode(i int) error {
	c.mu.Lock()
	nd := c.nodes[i]
	c.mu.Unlock()
	s, err := server.NewServer(c.nodeOptions(i, nd))
	if err != nil {
		return fmt.Errorf("node %d: %w", i, err)
	}
	go s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		s.Shutdown()
		return fmt.Errorf("node %d (client port %d, cluster port %d) not ready for connections", i, nd.clientPort, nd.clusterPort)
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	nd = c.nodes[i]
	nd.srv, nd.running = s, true
	nd.clientPort = s.Addr().(*net.TCPAddr).Port
	c.nodes[i] = nd
	return nil
}

// N is the number of nodes, running or not.
func (c *Cluster) N() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.nodes)
}

// Server returns node i's current server (after a Restart, the new one).
func (c *Cluster) Server(i int) *server.Server {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.nodes[i].srv
}

// Index returns the index of the node whose server is called name (as a
// stream's or the meta group's leader is named in JetStream's answers), or
// -1 if there is none.
func (c *Cluster) Index(name string) int {
	c.mu.Lock()
	defer c.mu.Unlock()
	for i, nd := range c.nodes {
		if nd.srv != nil && nd.srv.Name() == name {
			return i
		}
	}
	return -1
}

// Running reports whether node i is running.
func (c *Cluster) Running(i int) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.nodes[i].running
}

// URL returns node i's client URL; it stays the same across a restart.
func (c *Cluster) URL(i int) string {
	c.mu.Lock()
	defer c.mu.Unlock()
	return fmt.Sprintf("nats://127.0.0.1:%d", c.nodes[i].clientPort)
}

// URLs returns every node's client URL, node 0 first.
func (c *Cluster) URLs() []string {
	urls := make([]string, c.N())
	for i := range urls {
		urls[i] = c.URL(i)
	}
	return urls
}

// ConnectURL returns every node's client URL joined by commas, the form
// nats.Connect takes for a client that fails over between nodes.
func (c *Cluster) ConnectURL() string {
	return strings.Join(c.URLs(), ",")
}

// Shutdown stops node i and waits until it has stopped. Its store stays,
// so Restart brings it back with what it had. Stopping a stopped node does
// nothing.
func (c *Cluster) Shutdown(i int) {
	c.mu.Lock()
	nd := c.nodes[i]
	c.nodes[i].running = false
	c.mu.Unlock()
	if nd.running {
		nd.srv.Shutdown()
		nd.srv.WaitForShutdown()
	}
}

// Restart starts a stopped node i again with the same name, client and
// cluster ports and store, and waits until the cluster is ready again
// (WaitReady). It fails the test if the node is running or cannot start.
func (c *Cluster) Restart(i int) *server.Server {
	c.t.Helper()
	if c.Running(i) {
		c.t.Fatalf("natstest: restart of running node %d", i)
	}
	if err := c.startNode(i); err != nil {
		c.t.Fatalf("natstest: restart: %v", err)
	}
	c.WaitReady()
	return c.Server(i)
}

// Leader returns the running node that is the JetStream meta leader, or
// nil while there is none.
func (c *Cluster) Leader() *server.Server {
	for _, s := range c.running() {
		if s.JetStreamIsLeader() {
			return s
		}
	}
	return nil
}

// running returns the servers of the running nodes.
func (c *Cluster) running() []*server.Server {
	c.mu.Lock()
	defer c.mu.Unlock()
	var ss []*server.Server
	for _, nd := range c.nodes {
		if nd.running {
			ss = append(ss, nd.srv)
		}
	}
	return ss
}

// WaitReady waits up to ClusterReady until every running node has a route
// to every other running node, a running node is the JetStream meta leader
// and sees every running node online, and every running node's JetStream is
// current with the leader. It fails the test otherwise. After a Shutdown it
// waits for the election among the nodes left, which needs a majority of
// all nodes (stopped ones stay members of the meta group).
func (c *Cluster) WaitReady() {
	c.t.Helper()
	WaitFor(c.t, ClusterReady, c.ready)
}

// ready is WaitReady's condition.
func (c *Cluster) ready() error {
	ss := c.running()
	for _, s := range ss {
		rz, err := s.Routez(nil)
		if err != nil {
			return err
		}
		remotes := map[string]bool{}
		for _, r := range rz.Routes {
			remotes[r.RemoteID] = true
		}
		if len(remotes) < len(ss)-1 {
			return fmt.Errorf("%s has routes to %d of %d other nodes", s.Name(), len(remotes), len(ss)-1)
		}
	}
	l := c.Leader()
	if l == nil {
		return errors.New("no JetStream meta leader")
	}
	if p, n := len(l.JetStreamClusterPeers()), len(ss); p != n {
		return fmt.Errorf("meta leader %s sees %d of %d running nodes online", l.Name(), p, n)
	}
	for _, s := range ss {
		if !s.JetStreamIsCurrent() {
			return fmt.Errorf("%s is not current with the meta leader", s.Name())
		}
	}
	return nil
}

// shutdownAll stops every running node; it is the cluster's cleanup.
func (c *Cluster) shutdownAll() {
	for i := range c.N() {
		c.Shutdown(i)
	}
}
