package cluster

import (
	"context"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// testCluster is one in-process 3-node NATS cluster (routes on loopback,
// JetStream on each node) shared by every test of this package.
type testCluster struct {
	mu      sync.Mutex
	opts    []*server.Options
	servers []*server.Server
}

var tc *testCluster

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "forewarn-cluster-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	tc, err = startCluster(dir)
	code := 1
	if err != nil {
		fmt.Fprintln(os.Stderr, "start the test cluster:", err)
	} else {
		code = m.Run()
		tc.shutdown()
	}
	_ = os.RemoveAll(dir)
	os.Exit(code)
}

func freePort() (int, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port, nil
}

func startCluster(dir string) (*testCluster, error) {
	const n = 3
	var clientPorts, routePorts [n]int
	var routes []string
	for i := range n {
		var err error
		if clientPorts[i], err = freePort(); err != nil {
			return nil, err
		}
		if routePorts[i], err = freePort(); err != nil {
			return nil, err
		}
		routes = append(routes, fmt.Sprintf("nats://127.0.0.1:%d", routePorts[i]))
	}
	c := &testCluster{}
	for i := range n {
		o := &server.Options{
			ServerName: fmt.Sprintf("n%d", i+1),
			Host:       "127.0.0.1",
			Port:       clientPorts[i],
			JetStream:  true,
			StoreDir:   filepath.Join(dir, fmt.Sprintf("n%d", i+1)),
			NoLog:      true,
			NoSigs:     true,
			Cluster:    server.ClusterOpts{Name: "forewarn-test", Host: "127.0.0.1", Port: routePorts[i]},
			Routes:     server.RoutesFromStr(strings.Join(routes, ",")),
		}
		c.opts = append(c.opts, o)
		c.servers = append(c.servers, nil)
		if err := c.start(i); err != nil {
			c.shutdown()
			return nil, err
		}
	}
	// The cluster answers "no responders" or "insufficient resources" until
	// its JetStream meta group has a leader and knows all three peers:
	// wait for an R3 bucket to be creatable.
	if err := c.waitReady(); err != nil {
		c.shutdown()
		return nil, fmt.Errorf("cluster not ready: %w", err)
	}
	return c, nil
}

// waitReady waits until an R3 bucket can be made, i.e. the meta group has
// a leader and sees all three peers online.
func (c *testCluster) waitReady() error {
	nc, err := nats.Connect(c.url())
	if err != nil {
		return err
	}
	defer nc.Close()
	js, _ := jetstream.New(nc)
	return poll(60*time.Second, func() error {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		if _, err := js.CreateOrUpdateKeyValue(ctx, jetstream.KeyValueConfig{Bucket: "READY", Replicas: 3}); err != nil {
			return err
		}
		return js.DeleteKeyValue(ctx, "READY")
	})
}

func (c *testCluster) start(i int) error {
	s, err := server.NewServer(c.opts[i])
	if err != nil {
		return err
	}
	s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		s.Shutdown()
		return fmt.Errorf("server %d not ready", i+1)
	}
	c.mu.Lock()
	c.servers[i] = s
	c.mu.Unlock()
	return nil
}

func (c *testCluster) stop(i int) {
	c.mu.Lock()
	s := c.servers[i]
	c.servers[i] = nil
	c.mu.Unlock()
	if s != nil {
		s.Shutdown()
		s.WaitForShutdown()
	}
}

func (c *testCluster) shutdown() {
	for i := range c.servers {
		c.stop(i)
	}
}

// url lists every node, starting at node first, so that clients spread
// over the nodes and reconnect to the others.
func (c *testCluster) urlFrom(first int) string {
	var u []string
	for k := range c.opts {
		o := c.opts[(first+k)%len(c.opts)]
		u = append(u, fmt.Sprintf("nats://127.0.0.1:%d", o.Port))
	}
	return strings.Join(u, ",")
}

func (c *testCluster) url() string { return c.urlFrom(0) }

// poll calls f until it returns nil, or fails with f's last error after
// limit (a bound for a broken test, not a speed requirement).
func poll(limit time.Duration, f func() error) error {
	deadline := time.Now().Add(limit)
	for {
		err := f()
		if err == nil {
			return nil
		}
		if time.Now().After(deadline) {
			return err
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// connect returns a client of the test cluster, preferring node first,
// and its JetStream context; both close with the test.
func connect(t *testing.T, first int, name string) (*nats.Conn, jetstream.JetStream) {
	t.Helper()
	nc, err := nats.Connect(tc.urlFrom(first), nats.Name(name), nats.MaxReconnects(-1),
		nats.ReconnectWait(50*time.Millisecond), nats.DontRandomize())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(nc.Close)
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	return nc, js
}

func ctxT(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}
