package stream

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/stream/streamtest"
)

// collector gathers what an Intake hands over.
type collector struct {
	mu      sync.Mutex
	msgs    []Message
	batches int
	maxLen  int
}

func (c *collector) handle(b []Message) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.msgs = append(c.msgs, b...)
	c.batches++
	c.maxLen = max(c.maxLen, len(b))
}

func (c *collector) len() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.msgs)
}

func (c *collector) seqs() []uint64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	s := make([]uint64, len(c.msgs))
	for i, m := range c.msgs {
		s[i] = m.Seq
	}
	return s
}

// runIntake starts in.Run and returns a stop function that cancels it and
// waits for its return.
func runIntake(t *testing.T, in *Intake, c *collector) (stop func()) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- in.Run(ctx, c.handle) }()
	return func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("Run: %v", err)
			}
		case <-time.After(20 * time.Second):
			t.Fatal("Run did not return after cancel")
		}
	}
}

func TestIntakePlainInOrder(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	in, err := NewIntake(nc, IntakeOptions{Subjects: []string{"metrics.>"}, BatchSize: 64})
	if err != nil {
		t.Fatal(err)
	}
	var c collector
	stop := runIntake(t, in, &c)
	// Run subscribes asynchronously; wait until the subscription is there.
	streamtest.Eventually(t, 5*time.Second, "subscription", func() bool {
		_ = nc.Publish("metrics.probe", []byte("-1"))
		_ = nc.Flush()
		return c.len() > 0
	})
	c.mu.Lock()
	c.msgs = nil
	c.mu.Unlock()
	pub := streamtest.Connect(t, url)
	const n = 5000
	for i := range n {
		if err := pub.Publish("metrics.a", []byte(strconv.Itoa(i))); err != nil {
			t.Fatal(err)
		}
	}
	_ = pub.Flush()
	streamtest.Eventually(t, 10*time.Second, "all messages", func() bool { return c.len() >= n })
	stop()
	c.mu.Lock()
	defer c.mu.Unlock()
	var got []Message
	for _, m := range c.msgs { // probes may still trail in
		if m.Subject == "metrics.a" {
			got = append(got, m)
		}
	}
	if len(got) != n {
		t.Fatalf("got %d messages, want %d", len(got), n)
	}
	for i, m := range got {
		if string(m.Data) != strconv.Itoa(i) || m.Seq != 0 || m.Received.IsZero() {
			t.Fatalf("message %d: %q seq %d received %v", i, m.Data, m.Seq, m.Received)
		}
	}
	if c.maxLen > 64 {
		t.Errorf("batch of %d > BatchSize 64", c.maxLen)
	}
	if in.Ack(5) != nil {
		t.Error("Ack in plain mode should be a no-op")
	}
}

func publishJS(t testing.TB, nc *nats.Conn, subj string, from, to int) {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	for i := from; i <= to; i++ {
		if _, err := js.Publish(context.Background(), subj, []byte(strconv.Itoa(i))); err != nil {
			t.Fatal(err)
		}
	}
}

// ackFloorAt waits until the server has applied an acknowledgement up to
// seq to the consumer: an ack is a message the server takes in on its
// own time (a flush only says it arrived), and a consumer reopened before
// would redeliver what it covers.
func ackFloorAt(t *testing.T, nc *nats.Conn, stream, consumer string, seq uint64) {
	t.Helper()
	js, err := jetstream.New(nc)
	if err != nil {
		t.Fatal(err)
	}
	streamtest.Eventually(t, 10*time.Second, "the acknowledgement applied", func() bool {
		c, err := js.Consumer(context.Background(), stream, consumer)
		if err != nil {
			return false
		}
		info, err := c.Info(context.Background())
		return err == nil && info.AckFloor.Stream >= seq
	})
}

func TestIntakeDurableRedelivery(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	o := IntakeOptions{Durable: true, Subjects: []string{"metrics.>"}, Stream: "T", Consumer: "c"}
	open := func() *Intake {
		t.Helper()
		in, err := NewIntake(nc, o)
		if err != nil {
			t.Fatal(err)
		}
		return in
	}

	in := open()
	publishJS(t, nc, "metrics.a", 1, 10)
	var c1 collector
	stop := runIntake(t, in, &c1)
	streamtest.Eventually(t, 10*time.Second, "first delivery", func() bool { return c1.len() >= 10 })
	if err := in.Ack(5); err != nil {
		t.Fatal(err)
	}
	ackFloorAt(t, nc, "T", "c", 5)
	stop()
	if got := c1.seqs(); !slices.Equal(got, []uint64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}) {
		t.Fatalf("first run seqs %v", got)
	}
	for i, m := range c1.msgs {
		if string(m.Data) != strconv.Itoa(i+1) || m.Subject != "metrics.a" || m.Received.IsZero() {
			t.Fatalf("message %d: %+v", i, m)
		}
	}

	// Reopened: the unacknowledged 6..10 come again, first and in order,
	// at once (not after AckWait), with the same Received times.
	in = open()
	var c2 collector
	stop = runIntake(t, in, &c2)
	streamtest.Eventually(t, 10*time.Second, "redelivery", func() bool { return c2.len() >= 5 })
	if got := c2.seqs(); !slices.Equal(got, []uint64{6, 7, 8, 9, 10}) {
		t.Fatalf("redelivered seqs %v, want 6..10", got)
	}
	for i, m := range c2.msgs {
		if !m.Received.Equal(c1.msgs[5+i].Received) {
			t.Errorf("seq %d: Received %v on redelivery, %v first", m.Seq, m.Received, c1.msgs[5+i].Received)
		}
	}
	if err := in.Ack(10); err != nil {
		t.Fatal(err)
	}
	ackFloorAt(t, nc, "T", "c", 10)
	stop()

	// Reopened after acknowledging everything: nothing old comes back; the
	// first message handed over is the new one.
	in = open()
	var c3 collector
	stop = runIntake(t, in, &c3)
	publishJS(t, nc, "metrics.b", 11, 11)
	streamtest.Eventually(t, 10*time.Second, "new message", func() bool { return c3.len() >= 1 })
	stop()
	if got := c3.seqs(); !slices.Equal(got, []uint64{11}) {
		t.Fatalf("after full ack got seqs %v, want [11]", got)
	}
}

func TestIntakeStreamSubjectsUpdated(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	o := IntakeOptions{Durable: true, Subjects: []string{"metrics.>"}, Stream: "U", MaxAge: time.Hour}
	if _, err := NewIntake(nc, o); err != nil {
		t.Fatal(err)
	}
	o.Subjects = []string{"metrics.>", "app.>"}
	o.MaxBytes = 1 << 20
	if _, err := NewIntake(nc, o); err != nil {
		t.Fatal(err)
	}
	js, _ := jetstream.New(nc)
	st, err := js.Stream(context.Background(), "U")
	if err != nil {
		t.Fatal(err)
	}
	cfg := st.CachedInfo().Config
	if !slices.Equal(cfg.Subjects, o.Subjects) || cfg.MaxBytes != 1<<20 || cfg.MaxAge != time.Hour ||
		cfg.Storage != jetstream.FileStorage || cfg.Discard != jetstream.DiscardOld {
		t.Fatalf("stream config %+v", cfg)
	}
}

func TestIntakeRunTwice(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	in, err := NewIntake(nc, IntakeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var c collector
	stop := runIntake(t, in, &c)
	streamtest.Eventually(t, 5*time.Second, "Run is taking messages", func() bool {
		_ = nc.Publish("metrics.probe", []byte("1"))
		_ = nc.Flush()
		return c.len() > 0
	})
	if err := in.Run(context.Background(), c.handle); !errors.Is(err, ErrRunning) {
		t.Errorf("second Run: %v, want ErrRunning", err)
	}
	stop()
}

func TestIntakeBadStream(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	_, err := NewIntake(nc, IntakeOptions{Durable: true, Stream: "bad.name"})
	if !errors.Is(err, ErrIntake) {
		t.Fatalf("got %v, want ErrIntake", err)
	}
}

// BenchmarkRawPubSub is the reference rate: core NATS publish→subscribe on
// an in-process server, for observation-sized and forecast-sized messages.
func BenchmarkRawPubSub(b *testing.B) {
	for _, size := range []int{40, 4096} {
		b.Run(fmt.Sprintf("%dB", size), func(b *testing.B) {
			_, url := streamtest.RunServer(b)
			b.ResetTimer()
			rate := streamtest.RawPubSubRate(b, url, size, b.N)
			b.ReportMetric(rate, "msg/s")
		})
	}
}

// BenchmarkIntake measures publish→handler through the Intake, plain and
// durable, for 40-byte observations published as fast as one connection
// can; compare its msg/s with BenchmarkRawPubSub/40B.
func BenchmarkIntake(b *testing.B) {
	for _, durable := range []bool{false, true} {
		name := "plain"
		if durable {
			name = "durable"
		}
		b.Run(name, func(b *testing.B) {
			_, url := streamtest.RunServer(b)
			nc := streamtest.Connect(b, url)
			in, err := NewIntake(nc, IntakeOptions{Durable: durable, Subjects: []string{"metrics.>"}})
			if err != nil {
				b.Fatal(err)
			}
			n := int64(b.N)
			var got, probes atomic.Int64
			all := make(chan struct{})
			ctx, cancel := context.WithCancel(context.Background())
			done := make(chan error, 1)
			go func() {
				done <- in.Run(ctx, func(batch []Message) {
					k := int64(0)
					for i := range batch {
						if batch[i].Subject == "metrics.bench" {
							k++
						}
					}
					probes.Add(int64(len(batch)) - k)
					if durable {
						_ = in.Ack(batch[len(batch)-1].Seq)
					}
					if k > 0 && got.Add(k) == n {
						close(all)
					}
				})
			}()
			probe := streamtest.Connect(b, url)
			payload := []byte(`{"time": 1714564740, "value": 1834.25}  `) // 40 bytes
			streamtest.Eventually(b, 5*time.Second, "intake live", func() bool {
				_ = probe.Publish("metrics.warm", payload)
				_ = probe.Flush()
				return probes.Load() > 0
			})
			pub := streamtest.Connect(b, url)
			b.ResetTimer()
			start := time.Now()
			if durable {
				// Core publications beyond what the stream can ingest are
				// dropped by the server, so a lossless durable publisher
				// waits for JetStream's acknowledgements (asynchronously).
				js, err := jetstream.New(pub, jetstream.WithPublishAsyncMaxPending(8192))
				if err != nil {
					b.Fatal(err)
				}
				for range n {
					if _, err := js.PublishAsync("metrics.bench", payload, jetstream.WithStallWait(30*time.Second)); err != nil {
						b.Fatal(err)
					}
				}
				<-js.PublishAsyncComplete()
			} else {
				for range n {
					if err := pub.Publish("metrics.bench", payload); err != nil {
						b.Fatal(err)
					}
				}
				_ = pub.Flush()
			}
			select {
			case <-all:
			case <-time.After(30 * time.Second):
				diag := ""
				if durable {
					js, _ := jetstream.New(nc)
					if st, err := js.Stream(context.Background(), "FOREWARN_INTAKE"); err == nil {
						diag = fmt.Sprintf("; stream holds %d messages", st.CachedInfo().State.Msgs)
						if c, err := st.Consumer(context.Background(), "forewarn"); err == nil {
							ci := c.CachedInfo()
							diag += fmt.Sprintf(", consumer pending %d ack-pending %d ack floor %d", ci.NumPending, ci.NumAckPending, ci.AckFloor.Stream)
						}
					}
				}
				b.Fatalf("handled %d of %d%s", got.Load(), n, diag)
			}
			el := time.Since(start)
			b.StopTimer()
			cancel()
			<-done
			b.ReportMetric(float64(n)/el.Seconds(), "msg/s")
		})
	}
}

// BenchmarkIntakeDurableBacklog measures how fast a durable Intake hands
// over a backlog already stored in the stream (the restart case, and the
// Intake's own cost without the publishers' acknowledgement round trips).
func BenchmarkIntakeDurableBacklog(b *testing.B) {
	_, url := streamtest.RunServer(b)
	nc := streamtest.Connect(b, url)
	o := IntakeOptions{Durable: true, Subjects: []string{"metrics.>"}}
	if _, err := NewIntake(nc, o); err != nil { // creates the stream
		b.Fatal(err)
	}
	n := int64(b.N)
	js, err := jetstream.New(nc, jetstream.WithPublishAsyncMaxPending(8192))
	if err != nil {
		b.Fatal(err)
	}
	payload := []byte(`{"time": 1714564740, "value": 1834.25}  `)
	for range n {
		if _, err := js.PublishAsync("metrics.bench", payload, jetstream.WithStallWait(30*time.Second)); err != nil {
			b.Fatal(err)
		}
	}
	<-js.PublishAsyncComplete()
	in, err := NewIntake(nc, o)
	if err != nil {
		b.Fatal(err)
	}
	var got atomic.Int64
	all := make(chan struct{})
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	b.ResetTimer()
	start := time.Now()
	go func() {
		done <- in.Run(ctx, func(batch []Message) {
			_ = in.Ack(batch[len(batch)-1].Seq)
			if got.Add(int64(len(batch))) == n {
				close(all)
			}
		})
	}()
	select {
	case <-all:
	case <-time.After(120 * time.Second):
		b.Fatalf("handled %d of %d", got.Load(), n)
	}
	el := time.Since(start)
	b.StopTimer()
	cancel()
	<-done
	b.ReportMetric(float64(n)/el.Seconds(), "msg/s")
}

// After Subscribed, a plain intake receives everything published, from a
// connection of its own, with no probing first.
func TestIntakePlainSubscribed(t *testing.T) {
	_, url := streamtest.RunServer(t)
	nc := streamtest.Connect(t, url)
	in, err := NewIntake(nc, IntakeOptions{Subjects: []string{"metrics.>"}})
	if err != nil {
		t.Fatal(err)
	}
	var c collector
	stop := runIntake(t, in, &c)
	defer stop()
	select {
	case <-in.Subscribed():
	case <-time.After(5 * time.Second):
		t.Fatal("Subscribed not closed within 5 s")
	}
	pub := streamtest.Connect(t, url)
	for i := range 100 {
		if err := pub.Publish("metrics.first", []byte(strconv.Itoa(i))); err != nil {
			t.Fatal(err)
		}
	}
	_ = pub.Flush()
	streamtest.Eventually(t, 5*time.Second, "all 100 messages", func() bool { return c.len() == 100 })
}
