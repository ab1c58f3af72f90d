package cluster

import (
	"context"
	"fmt"
	"os"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/stream/cluster/clustertest"
)

// tc is the in-process 3-node NATS cluster shared by every test of this
// package.
var tc *clustertest.Cluster

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "forewarn-cluster-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	tc, err = clustertest.Start(dir)
	code := 1
	if err != nil {
		fmt.Fprintln(os.Stderr, "start the test cluster:", err)
	} else {
		code = m.Run()
		tc.Shutdown()
	}
	_ = os.RemoveAll(dir)
	os.Exit(code)
}

var poll = clustertest.Poll

// connect returns a client of the test cluster, preferring node first,
// and its JetStream context; both close with the test.
func connect(t *testing.T, first int, name string) (*nats.Conn, jetstream.JetStream) {
	t.Helper()
	nc, err := nats.Connect(tc.URLFrom(first), nats.Name(name), nats.MaxReconnects(-1),
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
	// Generous: a test's polls of up to 30 s each run inside it, and a
	// loaded 2-core machine (the race detector in CI) slows every request.
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	t.Cleanup(cancel)
	return ctx
}
