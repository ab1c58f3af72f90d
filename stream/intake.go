package stream

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream/cluster"
)

// Message is one intake message as handed to the handler.
type Message struct {
	Subject string
	Data    []byte // owned by the Message; never reused by the Intake
	// Seq is the JetStream stream sequence in durable mode, 0 in plain mode.
	Seq uint64
	// Received is the time the message reached the bus: in durable mode
	// the time JetStream stored it (the same on every redelivery, so that a
	// payload without a time gets the same time when replayed); in plain
	// mode the time the Intake received it.
	Received time.Time
	// Kind is the message's KindHeader: "gauge" or "counter" from a
	// publisher that knows the metric's kind (a source, from its TYPE
	// metadata), anything else as sent; "" without the header.
	Kind string
	// Delivery is the consumer's delivery sequence in durable mode (one
	// more for every delivery, redeliveries included), 0 in plain mode: a
	// jump says a delivery was lost in transit (a server restarting).
	Delivery uint64
}

// KindHeader is the NATS message header in which a publisher may name the
// kind of its series: "gauge" or "counter". A series whose config entry
// says kind: auto takes the kind its first message names.
const KindHeader = "Forewarn-Kind"

// IntakeOptions configure an Intake. A zero field takes the default given
// in its comment; those of Subjects, Stream, Consumer, MaxAge and MaxBytes
// are the configuration's (config.Default().Intake).
type IntakeOptions struct {
	// Subjects to take in. Default ["metrics.>"].
	Subjects []string

	// Durable selects the JetStream intake (the config's intake.durable,
	// true by default there). False selects core subscriptions, which are
	// best effort: messages published while the daemon is down or
	// disconnected are lost, and nothing is redelivered.
	Durable bool

	// Stream is the JetStream stream name. Default "FOREWARN_INTAKE".
	Stream string
	// Consumer is the durable consumer name. Default "forewarn".
	Consumer string
	// MaxAge is the stream's retention by age: older messages are
	// discarded, acknowledged or not. Default 7 days.
	MaxAge time.Duration
	// MaxBytes is the stream's retention by size: beyond it the oldest
	// messages are discarded. Default 1 GiB. Negative: unlimited.
	MaxBytes int64
	// Partitions cuts the stream into this many partitions (the config's
	// cluster.partitions) with the subject transform cluster.Transform:
	// each stored subject starts with its partition number. Zero: no
	// transform (one instance owns everything). A stream that exists with
	// another count is refused (cluster.CheckStream).
	Partitions int
	// Replicas is how many servers hold the stream when it is created
	// (intake.replicas). Default 1.
	Replicas int

	// MaxAckPending bounds delivered but unacknowledged messages; the
	// server stops delivering at the bound. Default 200 000.
	MaxAckPending int
	// AckWait is how long the server waits for an acknowledgement before
	// it redelivers. Default 60 s.
	AckWait time.Duration

	// SetupTimeout bounds the JetStream requests of NewIntake. Default 10 s.
	SetupTimeout time.Duration

	// BatchSize is the most messages handed to the handler at once.
	// Default 1024.
	BatchSize int
	// BatchWait is how long a batch may wait to fill up once its first
	// message is there, when the batch before it held at least
	// BatchSize/64 messages (under load; otherwise messages are handed
	// over at once). Default 2 ms; negative: always hand over at once.
	BatchWait time.Duration
	// Buffer bounds the messages held between the bus and the handler;
	// when it is full the Intake stops taking messages from the client
	// (durable: the server holds them; plain: the client buffers up to
	// PendingMsgs, then drops and counts them). Default 16 384.
	Buffer int
	// PendingMsgs and PendingBytes are the client-side limits per plain
	// subscription. Defaults 1 000 000 and 256 MiB.
	PendingMsgs  int
	PendingBytes int
}

func (o IntakeOptions) withDefaults() IntakeOptions {
	def := config.Default().Intake // one source for the defaults the config documents
	if len(o.Subjects) == 0 {
		o.Subjects = def.Subjects
	}
	if o.Stream == "" {
		o.Stream = def.Stream
	}
	if o.Consumer == "" {
		o.Consumer = def.Consumer
	}
	if o.MaxAge == 0 {
		o.MaxAge = def.MaxAge
	}
	if o.MaxBytes == 0 {
		o.MaxBytes = def.MaxBytes
	}
	if o.Replicas <= 0 {
		o.Replicas = 1
	}
	if o.MaxAckPending == 0 {
		o.MaxAckPending = 200_000
	}
	if o.AckWait == 0 {
		o.AckWait = 60 * time.Second
	}
	if o.SetupTimeout <= 0 {
		o.SetupTimeout = 10 * time.Second
	}
	if o.BatchSize <= 0 {
		o.BatchSize = 1024
	}
	if o.BatchWait == 0 {
		o.BatchWait = 2 * time.Millisecond
	}
	if o.Buffer <= 0 {
		o.Buffer = 16384
	}
	if o.PendingMsgs == 0 {
		o.PendingMsgs = 1_000_000
	}
	if o.PendingBytes == 0 {
		o.PendingBytes = 256 << 20
	}
	return o
}

// Intake takes messages off the bus and hands them, in order, in batches,
// to one handler goroutine. See the package documentation for the
// delivery guarantees of the two modes.
type Intake struct {
	nc   *nats.Conn
	o    IntakeOptions
	cons jetstream.Consumer // nil in plain mode

	running sync.Mutex // held by Run

	mu      sync.Mutex
	space   *sync.Cond // signalled when buf shrinks or the intake stops
	buf     []Message
	stopped bool   // no longer blocking pushes: Run is draining
	lastSeq uint64 // highest stream sequence buffered in this Run
	ready   chan struct{}
	full    chan struct{}

	subscribed chan struct{} // closed once the first Run's subscriptions are on the server
	subOnce    sync.Once

	ackMu   sync.Mutex
	unacked []delivered // delivered, not yet acknowledged, in delivery order
	head    int
	dropped uint64 // plain mode: messages the client dropped (slow consumer)
}

type delivered struct {
	seq uint64
	msg jetstream.Msg
}

// NewIntake prepares an intake on nc, waiting at most SetupTimeout for the
// server's answers. In durable mode it creates the
// JetStream stream if it is absent (file storage, limits retention by
// MaxAge and MaxBytes, discarding the oldest), updates its subjects and
// limits if they differ, and (re)creates the durable consumer so that
// delivery resumes just after the consumer's acknowledgement floor, in
// stream order: messages that were delivered but not acknowledged before a
// restart come first, without waiting for AckWait.
func NewIntake(nc *nats.Conn, o IntakeOptions) (*Intake, error) {
	o = o.withDefaults()
	ctx, cancel := context.WithTimeout(context.Background(), o.SetupTimeout)
	defer cancel()
	in := newIntake(nc, o)
	if !o.Durable {
		return in, nil
	}
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrIntake, err)
	}
	st, err := ensureStream(ctx, js, o)
	if err != nil {
		return nil, err
	}
	in.cons, err = resumeConsumer(ctx, st, o)
	if err != nil {
		return nil, err
	}
	return in, nil
}

// newIntake returns an Intake with options o (defaults applied) and no
// consumer yet.
func newIntake(nc *nats.Conn, o IntakeOptions) *Intake {
	in := &Intake{
		nc:         nc,
		o:          o,
		ready:      make(chan struct{}, 1),
		full:       make(chan struct{}, 1),
		subscribed: make(chan struct{}),
	}
	in.space = sync.NewCond(&in.mu)
	return in
}

func ensureStream(ctx context.Context, js jetstream.JetStream, o IntakeOptions) (jetstream.Stream, error) {
	want := jetstream.StreamConfig{
		Name:        o.Stream,
		Description: "forewarn intake: observations awaiting the daemon",
		Subjects:    o.Subjects,
		Storage:     jetstream.FileStorage,
		Retention:   jetstream.LimitsPolicy,
		Discard:     jetstream.DiscardOld,
		MaxAge:      o.MaxAge,
		MaxBytes:    o.MaxBytes,
		MaxMsgs:     -1,
		Replicas:    o.Replicas,
	}
	if o.Partitions > 0 {
		want.SubjectTransform = cluster.Transform(o.Partitions)
	}
	if err := cluster.CheckStream(ctx, js, o.Stream, o.Partitions); err != nil {
		return nil, fmt.Errorf("%w: %w", ErrIntake, err)
	}
	st, err := js.Stream(ctx, o.Stream)
	if errors.Is(err, jetstream.ErrStreamNotFound) {
		// cluster.Ensure: instances started at one moment create it at once
		st, err = cluster.Ensure(ctx,
			func(ctx context.Context) (jetstream.Stream, error) { return js.CreateStream(ctx, want) },
			func(ctx context.Context) (jetstream.Stream, error) { return js.Stream(ctx, o.Stream) },
			func(err error) (error, bool) { return err, errors.Is(err, jetstream.ErrStreamNameAlreadyInUse) })
		if err != nil {
			return nil, fmt.Errorf("%w: create stream %q on %v: %w", ErrIntake, o.Stream, o.Subjects, err)
		}
		return st, nil
	}
	if err != nil {
		return nil, fmt.Errorf("%w: look up stream %q: %w", ErrIntake, o.Stream, err)
	}
	cfg := st.CachedInfo().Config
	if slices.Equal(cfg.Subjects, want.Subjects) && cfg.MaxAge == want.MaxAge && cfg.MaxBytes == want.MaxBytes {
		return st, nil
	}
	cfg.Subjects, cfg.MaxAge, cfg.MaxBytes = want.Subjects, want.MaxAge, want.MaxBytes
	st, err = js.UpdateStream(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("%w: update stream %q to subjects %v: %w", ErrIntake, o.Stream, o.Subjects, err)
	}
	return st, nil
}

func resumeConsumer(ctx context.Context, st jetstream.Stream, o IntakeOptions) (jetstream.Consumer, error) {
	cfg := jetstream.ConsumerConfig{
		Durable:       o.Consumer,
		Description:   "forewarn daemon",
		AckPolicy:     jetstream.AckAllPolicy,
		DeliverPolicy: jetstream.DeliverAllPolicy,
		AckWait:       o.AckWait,
		MaxAckPending: o.MaxAckPending,
		MaxDeliver:    -1,
	}
	old, err := st.Consumer(ctx, o.Consumer)
	switch {
	case errors.Is(err, jetstream.ErrConsumerNotFound):
	case err != nil:
		return nil, fmt.Errorf("%w: look up consumer %q: %w", ErrIntake, o.Consumer, err)
	default:
		floor := old.CachedInfo().AckFloor.Stream
		if err := st.DeleteConsumer(ctx, o.Consumer); err != nil {
			return nil, fmt.Errorf("%w: reset consumer %q: %w", ErrIntake, o.Consumer, err)
		}
		if floor > 0 {
			cfg.DeliverPolicy = jetstream.DeliverByStartSequencePolicy
			cfg.OptStartSeq = floor + 1
		}
	}
	c, err := st.CreateConsumer(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("%w: create consumer %q: %w", ErrIntake, o.Consumer, err)
	}
	return c, nil
}

// push adds m to the buffer, waiting while the buffer is full unless the
// intake is stopping.
func (in *Intake) push(m Message) {
	in.mu.Lock()
	for len(in.buf) >= in.o.Buffer && !in.stopped {
		in.space.Wait()
	}
	if m.Seq != 0 {
		if m.Seq <= in.lastSeq { // a redelivery of a message already handed over
			in.mu.Unlock()
			return
		}
		in.lastSeq = m.Seq
	}
	in.buf = append(in.buf, m)
	n := len(in.buf)
	in.mu.Unlock()
	if n == 1 {
		signal(in.ready)
	}
	if n == in.o.BatchSize {
		signal(in.full)
	}
}

func signal(c chan struct{}) {
	select {
	case c <- struct{}{}:
	default:
	}
}

// take swaps the buffer for spare and returns what was buffered.
func (in *Intake) take(spare []Message) []Message {
	in.mu.Lock()
	b := in.buf
	in.buf = spare[:0]
	in.space.Broadcast()
	in.mu.Unlock()
	return b
}

func (in *Intake) buffered() int {
	in.mu.Lock()
	defer in.mu.Unlock()
	return len(in.buf)
}

// Run takes messages and calls handle with batches of at most BatchSize
// messages, in the order the bus delivered them, from Run's goroutine
// only. In durable mode sequences are strictly increasing within one Run
// (a redelivery of a message already handed over is dropped); across Runs
// and restarts a message may come again, and the caller recognises it by
// Seq. The batch slice is reused after handle returns; the Messages' Data
// are not.
//
// When ctx is cancelled Run stops taking messages from the bus, hands over
// everything already taken, and returns nil. It returns an error wrapping
// ErrIntake if the subscriptions cannot be set up, or ErrRunning if the
// Intake is already running.
func (in *Intake) Run(ctx context.Context, handle func(batch []Message)) error {
	if !in.running.TryLock() {
		return ErrRunning
	}
	defer in.running.Unlock()
	in.mu.Lock()
	in.stopped = false
	in.lastSeq = 0
	in.mu.Unlock()

	stop, err := in.subscribe()
	if err != nil {
		return err
	}
	// A flush round trip puts the subscriptions on the server before
	// Subscribed says so (a plain subscription misses what is published
	// before the server knows of it).
	if err := in.nc.FlushTimeout(in.o.SetupTimeout); err != nil {
		stop()
		return fmt.Errorf("%w: subscribe: %w", ErrIntake, err)
	}
	in.subOnce.Do(func() { close(in.subscribed) })
	var spare []Message
	deliver := func(b []Message) {
		for len(b) > 0 {
			n := min(len(b), in.o.BatchSize)
			handle(b[:n])
			b = b[n:]
		}
	}
	for {
		select {
		case <-in.ready:
		case <-ctx.Done():
			in.mu.Lock()
			in.stopped = true
			in.space.Broadcast()
			in.mu.Unlock()
			stop() // returns once no more pushes can come
			b := in.take(spare)
			deliver(b)
			return nil
		}
		// Wait for a batch to fill only under load, when the last batch
		// held at least a sixty-fourth of BatchSize: at low rates a
		// message goes through at once, and a high rate still gets full
		// batches.
		if in.o.BatchWait > 0 && len(spare) >= in.o.BatchSize/64 && in.buffered() < in.o.BatchSize {
			t := time.NewTimer(in.o.BatchWait)
			select {
			case <-in.full:
			case <-t.C:
			case <-ctx.Done():
			}
			t.Stop()
		}
		b := in.take(spare)
		deliver(b)
		clear(b)
		spare = b
	}
}

// Subscribed is closed once Run's subscriptions (or JetStream consumer)
// are in place on the server: in plain mode, what is published from then
// on is delivered.
func (in *Intake) Subscribed() <-chan struct{} { return in.subscribed }

// subscribe starts delivery into the buffer and returns the function that
// stops it and waits until no more messages can be pushed.
func (in *Intake) subscribe() (func(), error) {
	if !in.o.Durable {
		return in.subscribePlain()
	}
	cc, err := in.cons.Consume(func(m jetstream.Msg) {
		md, err := m.Metadata()
		if err != nil {
			return // not a stream message; nothing to acknowledge
		}
		in.ackMu.Lock()
		in.unacked = append(in.unacked, delivered{seq: md.Sequence.Stream, msg: m})
		in.ackMu.Unlock()
		in.push(Message{Subject: m.Subject(), Data: m.Data(), Seq: md.Sequence.Stream, Received: md.Timestamp,
			Kind: m.Headers().Get(KindHeader), Delivery: md.Sequence.Consumer})
	},
		jetstream.PullMaxMessages(min(in.o.Buffer, in.o.MaxAckPending)),
		jetstream.ConsumeErrHandler(func(jetstream.ConsumeContext, error) {}),
	)
	if err != nil {
		return nil, fmt.Errorf("%w: consume from %q: %w", ErrIntake, in.o.Consumer, err)
	}
	return func() {
		cc.Stop()
		select {
		case <-cc.Closed():
		case <-time.After(30 * time.Second):
		}
	}, nil
}

func (in *Intake) subscribePlain() (func(), error) {
	var (
		subs []*nats.Subscription
		wg   sync.WaitGroup
	)
	handler := func(m *nats.Msg) {
		in.push(Message{Subject: m.Subject, Data: m.Data, Received: time.Now(), Kind: m.Header.Get(KindHeader)})
	}
	unsubscribeAll := func() {
		for _, u := range subs {
			_ = u.Unsubscribe()
		}
	}
	for _, s := range in.o.Subjects {
		sub, err := in.nc.Subscribe(s, handler)
		if err != nil {
			unsubscribeAll()
			return nil, fmt.Errorf("%w: subscribe to %q: %w", ErrIntake, s, err)
		}
		if err := sub.SetPendingLimits(in.o.PendingMsgs, in.o.PendingBytes); err != nil {
			_ = sub.Unsubscribe()
			unsubscribeAll()
			return nil, fmt.Errorf("%w: subscribe to %q: %w", ErrIntake, s, err)
		}
		wg.Add(1)
		sub.SetClosedHandler(func(string) { wg.Done() })
		subs = append(subs, sub)
	}
	// Core subscriptions hold no backlog: wait until the server has
	// registered them, so that whatever is published once the intake has
	// started reaches it.
	if err := in.nc.Flush(); err != nil {
		unsubscribeAll()
		return nil, fmt.Errorf("%w: register subscriptions: %w", ErrIntake, err)
	}
	return func() {
		for _, s := range subs {
			if d, err := s.Dropped(); err == nil {
				in.ackMu.Lock()
				in.dropped += uint64(d)
				in.ackMu.Unlock()
			}
			if err := s.Drain(); err != nil {
				_ = s.Unsubscribe()
			}
		}
		done := make(chan struct{})
		go func() { wg.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(30 * time.Second):
		}
	}, nil
}

// Ack acknowledges every message with a stream sequence ≤ seq. Call it
// only after the effect of all of them is committed. Acknowledgements are
// sent without waiting for the server (a lost one means a redelivery, which
// the caller recognises by Seq). Plain mode: no effect. Ack may be called
// from any goroutine.
func (in *Intake) Ack(seq uint64) error {
	if !in.o.Durable {
		return nil
	}
	in.ackMu.Lock()
	defer in.ackMu.Unlock()
	var last jetstream.Msg
	for in.head < len(in.unacked) && in.unacked[in.head].seq <= seq {
		last = in.unacked[in.head].msg
		in.unacked[in.head] = delivered{}
		in.head++
	}
	if in.head == len(in.unacked) {
		in.unacked, in.head = in.unacked[:0], 0
	} else if in.head > 1024 && in.head*2 > len(in.unacked) {
		n := copy(in.unacked, in.unacked[in.head:])
		clear(in.unacked[n:])
		in.unacked = in.unacked[:n]
		in.head = 0
	}
	if last == nil {
		return nil
	}
	// AckAll: acknowledging this message acknowledges every earlier one.
	if err := last.Ack(); err != nil && !errors.Is(err, jetstream.ErrMsgAlreadyAckd) {
		return fmt.Errorf("%w: ack %d: %w", ErrIntake, seq, err)
	}
	return nil
}

// Dropped returns how many messages the client dropped in plain mode
// because the handler fell behind (counted when a Run ends).
func (in *Intake) Dropped() uint64 {
	in.ackMu.Lock()
	defer in.ackMu.Unlock()
	return in.dropped
}

// Durable reports whether the intake uses JetStream.
func (in *Intake) Durable() bool { return in.o.Durable }
