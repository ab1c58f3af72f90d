package stream

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream/cluster"
)

// PartitionedIntake is the intake of one instance in cluster mode
// (cluster.partitions > 0): it consumes the partitions its cluster.Owner
// holds, each through that partition's consumer for the owner's epoch
// (cluster.OpenConsumer, which fences older epochs), and hands their
// messages to one handler, one batch at a time. It opens a partition's
// consumer when the Owner reports the partition gained and stops it when
// the Owner reports it lost.
//
// Every partition has its own consumer and its own acknowledgement floor.
// Their stream positions interleave, so an acknowledgement up to a
// position must not reach a message handed over after the records that
// it covers were taken: Mark (called when a flush takes its floor) notes,
// for each partition, the last position handed over, and Ack(seq)
// acknowledges on each consumer min(seq, that mark).
//
// A consumer starts at the first message the stream still holds: there
// are no snapshots yet, so a new owner rebuilds a series it has no record
// of from the stream's retained history, and one it has a record of skips
// what its record already reflects.
type PartitionedIntake struct {
	nc    *nats.Conn
	o     IntakeOptions
	st    jetstream.Stream
	owner *cluster.Owner
	cfg   *config.Config
	log   *slog.Logger

	subscribed chan struct{}
	handleMu   sync.Mutex // serialises the partitions' calls of the handler (unless Concurrent)

	// Concurrent lets the partitions call the handler at the same time,
	// each with its own batches in order (h27, issue 15: the daemon's
	// handler splits them among its loops and may be called so). Set it
	// before Run.
	Concurrent bool

	mu    sync.Mutex // guards parts and owned; never held while calling out
	parts map[int]*part
	owned map[int]uint64 // partition → epoch, as the Owner last reported
}

type part struct {
	p      int
	epoch  uint64
	in     *Intake
	cancel context.CancelFunc
	done   chan struct{}

	// handed and mark are guarded by PartitionedIntake.mu.
	handed uint64 // last stream position handed to the handler and applied
	mark   uint64 // handed when the last flush took its floor
}

// NewPartitionedIntake prepares the intake stream (created with
// o.Partitions partitions and o.Replicas copies if absent; refused if it
// is cut into another count) and the intake of the partitions that owner
// will hold. owner must not be started: Run starts it. cfg maps topics to
// intake subjects for OwnsTopic. o.Consumer is the prefix of the
// partition consumers' names (cluster.ConsumerName).
func NewPartitionedIntake(nc *nats.Conn, o IntakeOptions, owner *cluster.Owner, cfg *config.Config, log *slog.Logger) (*PartitionedIntake, error) {
	o = o.withDefaults()
	if o.Partitions < 1 || !o.Durable {
		return nil, fmt.Errorf("%w: a partitioned intake needs partitions > 0 and a durable stream (got %d, durable %v)", ErrIntake, o.Partitions, o.Durable)
	}
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	ctx, cancel := context.WithTimeout(context.Background(), o.SetupTimeout)
	defer cancel()
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrIntake, err)
	}
	st, err := ensureStream(ctx, js, o)
	if err != nil {
		return nil, err
	}
	return &PartitionedIntake{
		nc: nc, o: o, st: st, owner: owner, cfg: cfg, log: log,
		subscribed: make(chan struct{}),
		parts:      map[int]*part{},
		owned:      map[int]uint64{},
	}, nil
}

// Subscribed is closed once the Owner has joined: the stream holds
// everything published from then on, whichever instance takes it.
func (pi *PartitionedIntake) Subscribed() <-chan struct{} { return pi.subscribed }

// Run starts the Owner (leaving cleanly when ctx ends), then opens and
// stops partition consumers as the Owner reports changes, handing every
// partition's batches to handle, one call at a time, with the stored
// subject split back to the subject as published. It returns nil once ctx
// has ended and every partition has stopped, or the Owner's error.
func (pi *PartitionedIntake) Run(ctx context.Context, handle func(batch []Message)) error {
	if err := pi.owner.Start(ctx); err != nil {
		return fmt.Errorf("%w: %w", ErrIntake, err)
	}
	close(pi.subscribed)
	defer pi.stopAll()
	for c := range pi.owner.Changes() {
		if ctx.Err() != nil {
			break // leaving: stop consuming before the leases go
		}
		if c.Gained {
			pi.gain(ctx, c, handle)
		} else {
			pi.lose(c)
		}
	}
	pi.stopAll()
	for range pi.owner.Changes() { // let the Owner release its leases
	}
	return pi.owner.Err()
}

func (pi *PartitionedIntake) gain(ctx context.Context, c cluster.Change, handle func([]Message)) {
	pi.lose(cluster.Change{Partition: c.Partition}) // an older epoch still running
	octx, cancel := context.WithTimeout(ctx, pi.o.SetupTimeout)
	cons, err := cluster.OpenConsumer(octx, pi.st, pi.o.Consumer, c.Partition, c.Epoch, cluster.ConsumerOptions{
		AckWait: pi.o.AckWait, MaxAckPending: pi.o.MaxAckPending, Replicas: pi.o.Replicas,
	})
	cancel()
	if err != nil {
		// Fenced (a newer owner exists) or the bus failed: the Owner
		// reports the loss, or the lease lapses and the partition moves.
		if ctx.Err() != nil {
			return // leaving
		}
		if errors.Is(err, cluster.ErrFenced) {
			// A change reported late: the partition has moved on already.
			pi.log.Info("partition already taken by a newer owner", "partition", c.Partition, "epoch", c.Epoch, "err", err)
			return
		}
		pi.log.Error("partition not consumed", "partition", c.Partition, "epoch", c.Epoch, "err", err)
		return
	}
	in := newIntake(pi.nc, pi.o)
	in.cons = cons
	pctx, pcancel := context.WithCancel(ctx)
	pt := &part{p: c.Partition, epoch: c.Epoch, in: in, cancel: pcancel, done: make(chan struct{})}
	pi.mu.Lock()
	pi.parts[c.Partition] = pt
	pi.owned[c.Partition] = c.Epoch
	pi.mu.Unlock()
	pi.log.Info("partition gained", "partition", c.Partition, "epoch", c.Epoch, "consumer", cons.CachedInfo().Name, "reason", c.Reason)
	go func() {
		defer close(pt.done)
		err := in.Run(pctx, func(batch []Message) {
			for i := range batch {
				if _, subj, ok := cluster.Split(batch[i].Subject); ok {
					batch[i].Subject = subj
				}
			}
			if !pi.Concurrent {
				pi.handleMu.Lock()
				defer pi.handleMu.Unlock()
			}
			if pctx.Err() != nil {
				return // lost or leaving: another owner applies these
			}
			handle(batch)
			pi.mu.Lock()
			pt.handed = batch[len(batch)-1].Seq
			pi.mu.Unlock()
		})
		if err != nil {
			pi.log.Error("partition consumer stopped", "partition", pt.p, "epoch", pt.epoch, "err", err)
		}
	}()
}

// lose stops partition c.Partition's consumer (any epoch when c.Epoch is 0).
func (pi *PartitionedIntake) lose(c cluster.Change) {
	pi.mu.Lock()
	pt := pi.parts[c.Partition]
	if pt == nil || (c.Epoch != 0 && pt.epoch != c.Epoch) {
		pi.mu.Unlock()
		return
	}
	delete(pi.parts, c.Partition)
	delete(pi.owned, c.Partition)
	pi.mu.Unlock()
	pt.cancel()
	<-pt.done
	if c.Reason != "" {
		pi.log.Info("partition lost", "partition", c.Partition, "epoch", pt.epoch, "reason", c.Reason)
	}
}

func (pi *PartitionedIntake) stopAll() {
	pi.mu.Lock()
	var ps []int
	for p := range pi.parts {
		ps = append(ps, p)
	}
	pi.mu.Unlock()
	for _, p := range ps {
		pi.lose(cluster.Change{Partition: p})
	}
}

// Mark notes, for every partition, the last position handed over and
// applied: the next Ack reaches no further on that partition. The daemon
// calls it when a flush takes its floor (daemon.Marker).
func (pi *PartitionedIntake) Mark() {
	pi.mu.Lock()
	defer pi.mu.Unlock()
	for _, pt := range pi.parts {
		pt.mark = pt.handed
	}
}

// Ack acknowledges, on each partition's consumer, every message up to
// min(seq, the partition's mark). A partition lost meanwhile is not
// acknowledged: its next owner replays it, with no effect twice.
func (pi *PartitionedIntake) Ack(seq uint64) error {
	pi.mu.Lock()
	type ack struct {
		in  *Intake
		seq uint64
	}
	acks := make([]ack, 0, len(pi.parts))
	for _, pt := range pi.parts {
		if s := min(seq, pt.mark); s > 0 {
			acks = append(acks, ack{pt.in, s})
		}
	}
	pi.mu.Unlock()
	var errs []error
	for _, a := range acks {
		if err := a.in.Ack(a.seq); err != nil {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// h27 (issue 15, several loops): MarkWhere and AckWhere are Mark and Ack
// for the partitions sel selects, so that each of the daemon's loops marks
// and acknowledges the partitions it owns (daemon.PartMarker).

// MarkWhere is Mark for the partitions p with sel(p).
func (pi *PartitionedIntake) MarkWhere(sel func(p int) bool) {
	pi.mu.Lock()
	defer pi.mu.Unlock()
	for p, pt := range pi.parts {
		if sel(p) {
			pt.mark = pt.handed
		}
	}
}

// AckWhere is Ack for the partitions p with sel(p).
func (pi *PartitionedIntake) AckWhere(seq uint64, sel func(p int) bool) error {
	pi.mu.Lock()
	var ins []*Intake
	var seqs []uint64
	for p, pt := range pi.parts {
		if s := min(seq, pt.mark); s > 0 && sel(p) {
			ins, seqs = append(ins, pt.in), append(seqs, s)
		}
	}
	pi.mu.Unlock()
	var errs []error
	for i, in := range ins {
		if err := in.Ack(seqs[i]); err != nil {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// LeaseOwners returns the instance holding each partition's lease as
// this instance's Owner last saw the bucket, "" for a free partition
// (h27, issue 15: pages name the owners).
func (pi *PartitionedIntake) LeaseOwners() []string { return pi.owner.Owners() }

// Owned returns the partitions this instance consumes, with their epochs.
func (pi *PartitionedIntake) Owned() map[int]uint64 {
	pi.mu.Lock()
	defer pi.mu.Unlock()
	out := make(map[int]uint64, len(pi.owned))
	for p, e := range pi.owned {
		out[p] = e
	}
	return out
}

// PartitionOfTopic returns the partition of a topic: that of the subject
// it is published on under the first intake subject that can carry it.
// ok is false when no intake subject can.
func (pi *PartitionedIntake) PartitionOfTopic(topic string) (int, bool) {
	prefixes := pi.cfg.Prefixes()
	for i, pat := range pi.cfg.Intake.Subjects {
		subj := prefixes[i] + topic
		if config.MatchSubject(pat, subj) {
			return cluster.Partition(subj, pi.o.Partitions), true
		}
	}
	return 0, false
}

// OwnsTopic reports whether this instance consumes the partition of topic
// now: only then does it answer queries for it.
func (pi *PartitionedIntake) OwnsTopic(topic string) bool {
	p, ok := pi.PartitionOfTopic(topic)
	if !ok {
		return false
	}
	pi.mu.Lock()
	defer pi.mu.Unlock()
	_, ok = pi.owned[p]
	return ok
}

// LeaseBucket is the name of the lease bucket of the intake stream called
// stream: each set of instances sharing one stream has its own.
func LeaseBucket(stream string) string { return stream + "_LEASES" }

// NewClusterIntake builds the cluster-mode intake that c describes
// (c.Cluster.Partitions > 0): the lease bucket LeaseBucket(intake.stream)
// with intake.replicas copies, this instance's Owner (cluster.instance,
// cluster.lease) and the PartitionedIntake of c.Intake, whose partition
// consumers are named after intake.consumer.
func NewClusterIntake(nc *nats.Conn, c *config.Config, log *slog.Logger) (*PartitionedIntake, error) {
	name, err := c.Cluster.InstanceName()
	if err != nil {
		return nil, err
	}
	o := IntakeOptions{
		Subjects: c.Intake.Subjects, Durable: c.Intake.Durable,
		Stream: c.Intake.Stream, Consumer: c.Intake.Consumer,
		MaxAge: c.Intake.MaxAge, MaxBytes: c.Intake.MaxBytes,
		Partitions: c.Cluster.Partitions, Replicas: c.Intake.Replicas,
	}.withDefaults()
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, fmt.Errorf("%w: %w", ErrIntake, err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), o.SetupTimeout)
	defer cancel()
	// The stream first: a wrong partition count is the error to see.
	pi, err := NewPartitionedIntake(nc, o, nil, c, log)
	if err != nil {
		return nil, err
	}
	kv, err := cluster.EnsureBucket(ctx, js, LeaseBucket(o.Stream), o.Replicas, c.Cluster.Lease)
	if err != nil {
		return nil, err
	}
	pi.owner, err = cluster.NewOwner(js, kv, cluster.Options{
		Instance: name, Partitions: o.Partitions, Lease: c.Cluster.Lease, Logger: pi.log,
	})
	if err != nil {
		return nil, err
	}
	return pi, nil
}
