package streamtest

import (
	"context"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats-server/v2/server"
	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/stream/cluster"
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
	payload := letters(size)
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

// countAll consumes from cons, counting the messages into got (shared by
// the consumers of one measurement); it acknowledges (AckAll) every 1000th
// message of this consumer and the n-th of all, and closes done at the
// n-th.
func countAll(tb testing.TB, cons jetstream.Consumer, got *atomic.Int64, n int, done chan struct{}) jetstream.ConsumeContext {
	tb.Helper()
	var mine int64
	cc, err := cons.Consume(func(m jetstream.Msg) {
		mine++ // one handler goroutine per consumer
		k := got.Add(1)
		if mine%1000 == 0 || k == int64(n) {
			_ = m.Ack()
		}
		if k == int64(n) {
			close(done)
		}
	}, jetstream.PullMaxMessages(16384))
	if err != nil {
		tb.Fatalf("streamtest: consume: %v", err)
	}
	return cc
}

// rawStream connects a publisher to url and, on a connection of its own,
// creates a file stream named prefix_<k> on filter for the raw rates (with
// the cluster's partition transform when partitions > 0). drop deletes it.
func rawStream(tb testing.TB, url, prefix string, subjects []string, filter string, partitions int) (pub *nats.Conn, st jetstream.Stream, drop func()) {
	tb.Helper()
	if len(subjects) == 0 {
		tb.Fatal("streamtest: no subjects")
	}
	ctx := context.Background()
	pub = Connect(tb, url)
	js, err := jetstream.New(Connect(tb, url))
	if err != nil {
		tb.Fatalf("streamtest: jetstream: %v", err)
	}
	name := fmt.Sprintf("%s_%d", prefix, rawStreams.Add(1))
	cfg := jetstream.StreamConfig{
		Name: name, Subjects: []string{filter}, Storage: jetstream.FileStorage,
		Retention: jetstream.LimitsPolicy, Discard: jetstream.DiscardOld, MaxMsgs: -1, Replicas: 1,
	}
	if partitions > 0 {
		cfg.SubjectTransform = cluster.Transform(partitions)
	}
	if st, err = js.CreateStream(ctx, cfg); err != nil {
		tb.Fatalf("streamtest: create stream: %v", err)
	}
	return pub, st, func() { _ = js.DeleteStream(ctx, name) }
}

// RawDurableRate is RawFanInRate through JetStream, the way the daemon's
// durable intake gets its messages: a file-storage stream on filter (limits
// retention, oldest discarded first), a durable pull consumer that
// acknowledges all up to a message (AckAll, at most 200 000 unacknowledged,
// pulls of up to 16 384), and a publisher that publishes asynchronously and
// waits for every acknowledgement (at most 8192 in flight). The consumer
// acknowledges every 1000th message and the last. It returns the messages
// per second from the first publication until the consumer has received
// them all, and deletes the stream.
func RawDurableRate(tb testing.TB, url string, subjects []string, filter string, size, n int) float64 {
	tb.Helper()
	ctx := context.Background()
	pub, st, drop := rawStream(tb, url, "STREAMTEST_RAW", subjects, filter, 0)
	defer drop()
	cons, err := st.CreateOrUpdateConsumer(ctx, jetstream.ConsumerConfig{
		Durable: "raw", AckPolicy: jetstream.AckAllPolicy, DeliverPolicy: jetstream.DeliverAllPolicy,
		MaxAckPending: 200_000, MaxDeliver: -1,
	})
	if err != nil {
		tb.Fatalf("streamtest: create consumer: %v", err)
	}
	var got atomic.Int64
	done := make(chan struct{})
	defer countAll(tb, cons, &got, n, done).Stop()

	payload := letters(size)
	start := time.Now()
	PublishAcked(tb, pub, n, func(i int) (string, []byte) { return subjects[i%len(subjects)], payload })
	select {
	case <-done:
	case <-time.After(120 * time.Second):
		tb.Fatalf("streamtest: consumed %d of %d messages within 120s", got.Load(), n)
	}
	return float64(n) / time.Since(start).Seconds()
}

// PublishAcked publishes n messages through JetStream on nc, message i
// being msg(i), asynchronously with at most 8192 in flight, and returns
// once the server has acknowledged every one; a failed or missing
// acknowledgement fails tb. A flood of plain publications beyond a
// stream's ingest queue (100 000 messages in nats-server 2.15) would be
// dropped by the server; acknowledged ones are not.
func PublishAcked(tb testing.TB, nc *nats.Conn, n int, msg func(i int) (subject string, data []byte)) {
	tb.Helper()
	var failed atomic.Int64
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(8192),
		jetstream.WithPublishAsyncErrHandler(func(jetstream.JetStream, *nats.Msg, error) { failed.Add(1) }))
	if err != nil {
		tb.Fatalf("streamtest: jetstream: %v", err)
	}
	for i := range n {
		subj, data := msg(i)
		// A publisher that waits past the client's default 200 ms for an
		// acknowledgement fails: on a loaded machine the server takes
		// longer at times. The stall only throttles, so wait longer.
		if _, err := js.PublishAsync(subj, data, jetstream.WithStallWait(30*time.Second)); err != nil {
			tb.Fatalf("streamtest: publish: %v", err)
		}
	}
	select {
	case <-js.PublishAsyncComplete():
	case <-time.After(120 * time.Second):
		tb.Fatalf("streamtest: %d publications unacknowledged after 120s", js.PublishAsyncPending())
	}
	if f := failed.Load(); f > 0 {
		tb.Fatalf("streamtest: %d publications failed", f)
	}
}

// letters returns size bytes of "abc…zab…", a payload of that size.
func letters(size int) []byte {
	p := make([]byte, size)
	for i := range p {
		p[i] = 'a' + byte(i%26)
	}
	return p
}

// rawStreams numbers RawDurableRate's streams, so that runs on one server
// never share one.
var rawStreams atomic.Int64

// RawDrainRate is the raw rate of a backlog drain through JetStream, the
// way the daemon's durable intake catches up after a restart or a
// handover: n messages of size bytes, round-robin over subjects, are
// published into a file-storage stream on filter first (untimed, with
// acknowledgements), then consumers created on it receive them all. With
// partitions > 0 the stream stores the subjects with the partition
// transform of the cluster mode (cluster.Transform) and there is one
// consumer per partition (filter cluster.FilterSubject(p)), all on one
// connection, as a PartitionedIntake has them; otherwise one consumer
// takes everything. Each consumer is durable, acknowledges all up to a
// message (AckAll, at most 200 000 unacknowledged) every 1000th message
// and at its last, and pulls up to 16 384 at a time (the intake's
// buffer). It returns the messages per second from the start of the
// consumers until every message is received, and deletes the stream.
func RawDrainRate(tb testing.TB, url string, subjects []string, filter string, size, n, partitions int) float64 {
	tb.Helper()
	ctx := context.Background()
	pub, st, drop := rawStream(tb, url, "STREAMTEST_DRAIN", subjects, filter, partitions)
	defer drop()
	filters := []string{""}
	if partitions > 0 {
		filters = filters[:0]
		for p := range partitions {
			filters = append(filters, cluster.FilterSubject(p))
		}
	}
	var err error
	payload := letters(size)
	PublishAcked(tb, pub, n, func(i int) (string, []byte) { return subjects[i%len(subjects)], payload })

	conses := make([]jetstream.Consumer, len(filters))
	for i, f := range filters {
		conses[i], err = st.CreateOrUpdateConsumer(ctx, jetstream.ConsumerConfig{
			Durable: fmt.Sprintf("drain%d", i), FilterSubject: f,
			AckPolicy: jetstream.AckAllPolicy, DeliverPolicy: jetstream.DeliverAllPolicy,
			MaxAckPending: 200_000, MaxDeliver: -1,
		})
		if err != nil {
			tb.Fatalf("streamtest: create consumer: %v", err)
		}
	}
	var got atomic.Int64
	done := make(chan struct{})
	start := time.Now()
	for _, cons := range conses {
		defer countAll(tb, cons, &got, n, done).Stop()
	}
	select {
	case <-done:
	case <-time.After(120 * time.Second):
		tb.Fatalf("streamtest: drained %d of %d messages within 120s", got.Load(), n)
	}
	return float64(n) / time.Since(start).Seconds()
}
