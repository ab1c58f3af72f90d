package streamtest

import (
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
)

// Options returns the server options RunServer uses, for a test that needs
// to change some (TLS, users) before calling RunServerWith.
func Options(tb testing.TB) *server.Options {
	tb.Helper()
	return &server.Options{
		Host:      "127.0.0.1",
		Port:      -1,
		NoLog:     true,
		NoSigs:    true,
		JetStream: true,
		StoreDir:  tb.TempDir(),
	}
}

// RunServer starts an in-process server with Options and returns it with
// its client URL.
func RunServer(tb testing.TB) (*server.Server, string) {
	tb.Helper()
	return RunServerWith(tb, Options(tb))
}

// RunServerWith starts an in-process server with opts.
func RunServerWith(tb testing.TB, opts *server.Options) (*server.Server, string) {
	tb.Helper()
	s, err := server.NewServer(opts)
	if err != nil {
		tb.Fatalf("streamtest: new server: %v", err)
	}
	s.Start()
	if !s.ReadyForConnections(10 * time.Second) {
		s.Shutdown()
		tb.Fatal("streamtest: server not ready within 10s")
	}
	tb.Cleanup(func() {
		s.Shutdown()
		s.WaitForShutdown()
	})
	return s, s.ClientURL()
}

// Connect connects to url and closes the connection on cleanup.
func Connect(tb testing.TB, url string, opts ...nats.Option) *nats.Conn {
	tb.Helper()
	nc, err := nats.Connect(url, opts...)
	if err != nil {
		tb.Fatalf("streamtest: connect %s: %v", url, err)
	}
	tb.Cleanup(nc.Close)
	return nc
}

// Eventually polls cond every few milliseconds until it holds, and fails
// the test with msg if it does not within timeout.
func Eventually(tb testing.TB, timeout time.Duration, msg string, cond func() bool) {
	tb.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			tb.Fatalf("not within %s: %s", timeout, msg)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

// RawPubSubRate publishes n messages of size bytes from one connection to
// url and receives them on a subscription of another, and returns the
// messages per second from the first publication to the last reception.
// Every message goes to one subject, so the server's subject matching is
// always a cache hit: it is the best case of "raw NATS publish→subscribe".
// The subscription's client-side limits are lifted so that nothing is
// dropped; a drop fails tb.
func RawPubSubRate(tb testing.TB, url string, size, n int) float64 {
	tb.Helper()
	const subj = "streamtest.raw"
	return RawFanInRate(tb, url, []string{subj}, subj, size, n)
}

// RawFanInRate is RawPubSubRate for a traffic shape: the n messages go
// round-robin to subjects, and one subscription on filter (which must
// match every subject, and nothing else that is being published) receives
// them. With the subjects and message size of a daemon's intake or output,
// it is the raw rate of that same traffic without the daemon: the server
// matches as many distinct subjects as it would for the daemon (its match
// cache holds about a thousand, so 10 000 subjects in turn miss it).
func RawFanInRate(tb testing.TB, url string, subjects []string, filter string, size, n int) float64 {
	tb.Helper()
	if len(subjects) == 0 {
		tb.Fatal("streamtest: no subjects")
	}
	pub := Connect(tb, url)
	sub := Connect(tb, url)
	var got atomic.Int64
	done := make(chan struct{})
	s, err := sub.Subscribe(filter, func(*nats.Msg) {
		if got.Add(1) == int64(n) {
			close(done)
		}
	})
	if err != nil {
		tb.Fatalf("streamtest: subscribe: %v", err)
	}
	defer func() { _ = s.Unsubscribe() }()
	if err := s.SetPendingLimits(-1, -1); err != nil {
		tb.Fatalf("streamtest: pending limits: %v", err)
	}
	if err := sub.Flush(); err != nil {
		tb.Fatalf("streamtest: flush: %v", err)
	}
	payload := make([]byte, size)
	for i := range payload {
		payload[i] = 'a' + byte(i%26)
	}
	start := time.Now()
	for i := range n {
		if err := pub.Publish(subjects[i%len(subjects)], payload); err != nil {
			tb.Fatalf("streamtest: publish: %v", err)
		}
	}
	if err := pub.Flush(); err != nil {
		tb.Fatalf("streamtest: flush: %v", err)
	}
	select {
	case <-done:
	case <-time.After(60 * time.Second):
		tb.Fatalf("streamtest: received %d of %d messages within 60s", got.Load(), n)
	}
	el := time.Since(start)
	if d, _ := s.Dropped(); d > 0 {
		tb.Fatalf("streamtest: %d messages dropped", d)
	}
	if g := got.Load(); g != int64(n) {
		tb.Fatalf("streamtest: received %d messages, sent %d", g, n)
	}
	return float64(n) / el.Seconds()
}
