// Package clustertest runs an in-process 3-node NATS cluster (routes on
// loopback, JetStream on each node) for the tests of the cluster mode.
// A test binary starts one in TestMain and shares it among its tests:
// starting a cluster takes seconds.
package clustertest

import (
	"context"
	"fmt"
	"net"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Cluster is a running 3-node cluster.
type Cluster struct {
	mu      sync.Mutex
	opts    []*server.Options
	servers []*server.Server
}

func freePort() (int, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port, nil
}

// Start starts three nodes with their stores under dir and waits until an
// R3 bucket can be made. A node that does not come up (its port, free
// when chosen, taken meanwhile by another process: the test binaries of
// several packages run at once) makes it try again with new ports, at
// most three times in all.
func Start(dir string) (*Cluster, error) {
	var err error
	for attempt := 1; attempt <= 3; attempt++ {
		var c *Cluster
		if c, err = start(filepath.Join(dir, fmt.Sprintf("try%d", attempt))); err == nil {
			return c, nil
		}
	}
	return nil, err
}

func start(dir string) (*Cluster, error) {
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
	c := &Cluster{}
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
		if err := c.StartNode(i); err != nil {
			c.Shutdown()
			return nil, err
		}
	}
	// The cluster answers "no responders" or "insufficient resources" until
	// its JetStream meta group has a leader and knows all three peers:
	// wait for an R3 bucket to be creatable.
	if err := c.WaitReady(); err != nil {
		c.Shutdown()
		return nil, fmt.Errorf("cluster not ready: %w", err)
	}
	return c, nil
}

// WaitReady waits until an R3 bucket can be made, i.e. the meta group has
// a leader and sees all three peers online.
func (c *Cluster) WaitReady() error {
	nc, err := nats.Connect(c.URL())
	if err != nil {
		return err
	}
	defer nc.Close()
	js, _ := jetstream.New(nc)
	return Poll(60*time.Second, func() error {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		if _, err := js.CreateOrUpdateKeyValue(ctx, jetstream.KeyValueConfig{Bucket: "READY", Replicas: 3}); err != nil {
			return err
		}
		return js.DeleteKeyValue(ctx, "READY")
	})
}

// StartNode starts node i (0-based) again after StopNode.
func (c *Cluster) StartNode(i int) error {
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

// StopNode shuts node i down and waits for it.
func (c *Cluster) StopNode(i int) {
	c.mu.Lock()
	s := c.servers[i]
	c.servers[i] = nil
	c.mu.Unlock()
	if s != nil {
		s.Shutdown()
		s.WaitForShutdown()
	}
}

// Server returns node i, nil while it is stopped.
func (c *Cluster) Server(i int) *server.Server {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.servers[i]
}

// Shutdown stops every node.
func (c *Cluster) Shutdown() {
	for i := range c.servers {
		c.StopNode(i)
	}
}

// URLFrom lists every node, starting at node first, so that clients
// spread over the nodes and reconnect to the others.
func (c *Cluster) URLFrom(first int) string {
	var u []string
	for k := range c.opts {
		o := c.opts[(first+k)%len(c.opts)]
		u = append(u, fmt.Sprintf("nats://127.0.0.1:%d", o.Port))
	}
	return strings.Join(u, ",")
}

// URL lists every node, starting at the first.
func (c *Cluster) URL() string { return c.URLFrom(0) }

// Poll calls f until it returns nil, or fails with f's last error after
// limit (a bound for a broken test, not a speed requirement).
func Poll(limit time.Duration, f func() error) error {
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
