package stream

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"slices"
	"sync"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"

	"forewarn/config"
	"forewarn/stream/cluster"
)

// Headers of a forecast message published in cluster mode: the partition
// of its series and the epoch of the lease under which its publisher owned
// that partition (the lease's revision; a later owner's is larger). A
// consumer that keeps, per partition, the largest epoch seen recognises a
// message with a smaller one as the late output of a former owner (paused
// past its lease, then resumed) and may drop it: the current owner
// publishes the same forecast, deterministic in data time.
const (
	PartitionHeader = "Forewarn-Partition"
	EpochHeader     = "Forewarn-Epoch"
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
// Without handover a consumer starts at the first message the stream
// still holds: a new owner rebuilds a series it has no record of from the
// stream's retained history, and one it has a record of skips what its
// record already reflects. With handover (EnableHandover, as the daemon
// runs it) a consumer starts after the floor of the partition's latest
// snapshot, whose records the user has installed first.
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
	// cover is, per partition, the stream position up to which this
	// instance's own copies of the partition's series reflect every
	// message (Handover.Restore's keptOwn): the floor of the snapshot
	// that replaced them, then what each ownership acknowledged.
	cover map[int]uint64

	// Handover (EnableHandover); nil snaps: none, a new owner replays the
	// partition from the start of the stream.
	snapStore *cluster.SnapshotStore // NewClusterIntake's
	snaps     *cluster.SnapshotStore // snapStore once EnableHandover is called
	snapEvery time.Duration
	hand      Handover
	ownerStop context.CancelFunc  // ends the Owner (Leave)
	resume    chan cluster.Change // a part that lost a delivery in transit, to reopen
	drained   chan struct{}       // closed once the Owner's Changes are closed
}

// Handover is what a PartitionedIntake needs of its user (the daemon) to
// hand partitions over through snapshots (EnableHandover).
type Handover struct {
	// Restore makes the series of partition p, owned now at epoch, what
	// snap holds (nil: no snapshot was stored), before any of the
	// partition's messages is handed over. It returns once done, or with
	// ctx's error. keptOwn says that it kept this instance's own copies
	// of the partition's series: the replay then starts no later than
	// what those copies are known to reflect (the floor of the snapshot
	// that last replaced them, or what an ownership since acknowledged),
	// since a snapshot of an older epoch may have a later floor than the
	// copies (a fenced owner's late snapshot), and an attempt to own the
	// partition that was fenced may have replaced them with an older one.
	Restore func(ctx context.Context, p int, epoch uint64, snap *cluster.Snapshot) (keptOwn bool, err error)
	// Records returns the stored records of the series of each of the
	// partitions ps: every effect acknowledged so far is in them.
	Records func(ps []int) (map[int][][]byte, error)
	// Gap is called when the stream no longer holds what a replay of
	// partition p from floor needs (its first message is first).
	Gap func(p int, floor, first uint64)
}

type part struct {
	p      int
	epoch  uint64
	in     *Intake
	cancel context.CancelFunc
	done   chan struct{}

	// handed, mark, acked and snapped are guarded by PartitionedIntake.mu.
	handed uint64 // last stream position handed to the handler and applied
	mark   uint64 // handed when the last flush took its floor
	acked  uint64 // acknowledged on this consumer (at first: the snapshot's floor)
	// delivery is the last delivery sequence handed over (the part's
	// goroutine's); a jump stops the part for a restart (resume).
	delivery uint64
	snapped  uint64 // the floor of the last snapshot stored (or loaded)
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
		drained:    make(chan struct{}),
		resume:     make(chan cluster.Change, o.Partitions+1),
		parts:      map[int]*part{},
		owned:      map[int]uint64{},
		cover:      map[int]uint64{},
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
//
// With handover (EnableHandover) Run also stores every owned partition's
// snapshot every snapshot interval, and when ctx ends it stops the
// consumers but keeps the leases, so that the last effects can still be
// stored and acknowledged: Leave then stores the final snapshots and
// releases the leases.
func (pi *PartitionedIntake) Run(ctx context.Context, handle func(batch []Message)) error {
	ownerCtx := ctx
	if pi.snaps != nil {
		var stop context.CancelFunc
		ownerCtx, stop = context.WithCancel(context.Background())
		pi.ownerStop = stop
	}
	if err := pi.owner.Start(ownerCtx); err != nil {
		if pi.ownerStop != nil {
			pi.ownerStop()
			pi.ownerStop = nil
		}
		return fmt.Errorf("%w: %w", ErrIntake, err)
	}
	close(pi.subscribed)
	snapDone := make(chan struct{})
	snapCtx, stopSnaps := context.WithCancel(ctx)
	if pi.snaps != nil {
		go func() {
			defer close(snapDone)
			pi.snapshotEvery(snapCtx)
		}()
	} else {
		close(snapDone)
	}
	changes := pi.owner.Changes()
loop:
	for {
		select {
		case <-ctx.Done():
			break loop // leaving: stop consuming before the leases go
		case c, ok := <-changes:
			switch {
			case !ok:
				break loop
			case !c.Gained:
				pi.lose(c)
			case ctx.Err() == nil:
				pi.gain(ctx, c, handle)
			}
		case c := <-pi.resume:
			pi.reopen(ctx, c, handle)
		}
	}
	stopSnaps()
	<-snapDone
	if pi.snaps != nil && ctx.Err() != nil {
		// Leaving with handover: the consumers stop, the parts stay for
		// the last acknowledgements, and the leases until Leave.
		pi.stopConsumers()
		go func() {
			defer close(pi.drained)
			for c := range pi.owner.Changes() {
				if !c.Gained {
					pi.forget(c.Partition) // no longer ours: no final snapshot
				}
			}
		}()
		return nil
	}
	pi.stopAll()
	for range pi.owner.Changes() { // let the Owner release its leases
	}
	close(pi.drained)
	return pi.owner.Err()
}

// EnableHandover makes the intake load each gained partition's snapshot
// from the snapshot store (SnapshotStore(intake.stream); through
// h.Restore) and replay the partition from its floor, store the owned
// partitions' snapshots every cluster.snapshot_every and on Leave, and
// report replays the stream can no longer serve whole (h.Gap). Call it
// before Run, on an intake from NewClusterIntake; the user must then call
// Leave after Run has returned and the last acknowledgements are made.
func (pi *PartitionedIntake) EnableHandover(h Handover) error {
	if pi.snapStore == nil || pi.snapEvery <= 0 {
		return fmt.Errorf("%w: handover needs the snapshot store of NewClusterIntake", ErrIntake)
	}
	pi.snaps, pi.hand = pi.snapStore, h
	return nil
}

// CanHandover reports whether EnableHandover can be called: the intake
// comes from NewClusterIntake (its snapshot store) and handover has not
// been enabled yet.
func (pi *PartitionedIntake) CanHandover() bool {
	return pi.snapStore != nil && pi.snapEvery > 0 && pi.snaps == nil
}

// Leave stores the snapshot of every partition still owned, at its
// acknowledged floor, then releases the leases and waits until the Owner
// has stopped. Only with handover, after Run has returned.
func (pi *PartitionedIntake) Leave() error {
	if pi.snaps == nil || pi.ownerStop == nil {
		return nil
	}
	pi.storeSnapshots(true)
	pi.ownerStop()
	<-pi.drained
	pi.mu.Lock()
	clear(pi.parts)
	clear(pi.owned)
	pi.mu.Unlock()
	return pi.owner.Err()
}

// snapshotEvery stores the owned partitions' snapshots every snapEvery
// until ctx ends.
func (pi *PartitionedIntake) snapshotEvery(ctx context.Context) {
	t := time.NewTicker(pi.snapEvery)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			pi.storeSnapshots(false)
		}
	}
}

// storeSnapshots stores the snapshot of each owned partition whose
// acknowledged floor moved since its last one (all of them when final).
// The floor is read before the records: every effect at or below it is
// already in them.
func (pi *PartitionedIntake) storeSnapshots(final bool) {
	type job struct {
		p            int
		epoch, floor uint64
	}
	var jobs []job
	pi.mu.Lock()
	for p, pt := range pi.parts {
		if pt.acked > pt.snapped || (final && pt.acked > 0) {
			jobs = append(jobs, job{p, pt.epoch, pt.acked})
		}
	}
	pi.mu.Unlock()
	if len(jobs) == 0 {
		return
	}
	slices.SortFunc(jobs, func(a, b job) int { return a.p - b.p })
	ps := make([]int, len(jobs))
	for i, j := range jobs {
		ps[i] = j.p
	}
	all, err := pi.hand.Records(ps)
	if err != nil {
		pi.log.Error("partition snapshots not stored: records unreadable", "err", err)
		return
	}
	// One deadline for the whole round: a bus that does not answer must
	// not hold a shutdown for a timeout per partition.
	ctx, cancel := context.WithTimeout(context.Background(), pi.o.SetupTimeout)
	defer cancel()
	for _, j := range jobs {
		recs := all[j.p]
		err := pi.snaps.Put(ctx, &cluster.Snapshot{Partition: j.p, Epoch: j.epoch, Floor: j.floor, Records: recs})
		if err != nil {
			pi.log.Warn("partition snapshot not stored", "partition", j.p, "epoch", j.epoch, "floor", j.floor, "err", err)
			continue
		}
		pi.mu.Lock()
		if pt := pi.parts[j.p]; pt != nil && pt.epoch == j.epoch {
			pt.snapped = max(pt.snapped, j.floor)
		}
		pi.mu.Unlock()
		pi.log.Debug("partition snapshot stored", "partition", j.p, "epoch", j.epoch, "floor", j.floor, "records", len(recs), "final", final)
	}
}

// stopConsumers stops every partition's consumer and keeps the parts.
func (pi *PartitionedIntake) stopConsumers() {
	pi.mu.Lock()
	var pts []*part
	for _, pt := range pi.parts {
		pts = append(pts, pt)
	}
	pi.mu.Unlock()
	for _, pt := range pts {
		pt.cancel()
		<-pt.done
	}
}

// forget drops partition p's part without waiting for its consumer
// (stopped already).
func (pi *PartitionedIntake) forget(p int) {
	pi.mu.Lock()
	if pt := pi.parts[p]; pt != nil {
		pi.cover[p] = pt.acked
	}
	delete(pi.parts, p)
	delete(pi.owned, p)
	pi.mu.Unlock()
}

// restore loads partition p's snapshot and hands it to Handover.Restore;
// it returns the floor to replay from (0: the start of the stream).
func (pi *PartitionedIntake) restore(ctx context.Context, c cluster.Change) (uint64, error) {
	gctx, cancel := context.WithTimeout(ctx, pi.o.SetupTimeout)
	snap, err := pi.snaps.Get(gctx, c.Partition)
	cancel()
	if err != nil {
		if ctx.Err() != nil {
			return 0, ctx.Err()
		}
		// A snapshot that cannot be read: the replay from the start of
		// the stream rebuilds the partition (Gap says if it cannot).
		pi.log.Error("partition snapshot unreadable; replaying the partition from the start of the stream", "partition", c.Partition, "err", err)
		snap = nil
	}
	keptOwn, err := pi.hand.Restore(ctx, c.Partition, c.Epoch, snap)
	if err != nil {
		return 0, err
	}
	var floor uint64
	if snap != nil {
		floor = snap.Floor
	}
	pi.mu.Lock()
	if keptOwn {
		floor = min(floor, pi.cover[c.Partition])
	}
	// The copies now reflect everything up to floor (the snapshot's
	// records replaced them, or the replay starts after what they hold),
	// even if the consumer is not opened below.
	pi.cover[c.Partition] = floor
	pi.mu.Unlock()
	ictx, cancel := context.WithTimeout(ctx, pi.o.SetupTimeout)
	info, err := pi.st.Info(ictx)
	cancel()
	if err != nil {
		pi.log.Warn("stream state unknown; replay gap not checked", "partition", c.Partition, "err", err)
	} else if first := info.State.FirstSeq; first > floor+1 && info.State.LastSeq > floor {
		pi.log.Error("the stream no longer holds everything the partition's replay needs: messages after the snapshot were removed by the stream's limits; its series are rebuilt from what remains",
			"partition", c.Partition, "epoch", c.Epoch, "snapshot_floor", floor, "first_available", first, "missing", fmt.Sprintf("%d..%d", floor+1, first-1))
		if pi.hand.Gap != nil {
			pi.hand.Gap(c.Partition, floor, first)
		}
	}
	return floor, nil
}

func (pi *PartitionedIntake) gain(ctx context.Context, c cluster.Change, handle func([]Message)) {
	pi.lose(cluster.Change{Partition: c.Partition}) // an older epoch still running
	var floor uint64
	if pi.snaps != nil {
		var err error
		if floor, err = pi.restore(ctx, c); err != nil {
			if ctx.Err() == nil {
				pi.log.Error("partition not restored; not consumed", "partition", c.Partition, "epoch", c.Epoch, "err", err)
			}
			return
		}
	}
	pi.open(ctx, c, floor, nil, handle)
}

// open opens partition c.Partition's consumer at epoch c.Epoch from
// floor+1 and starts handing its batches over. prev, when reopening,
// is the part it replaces: its positions carry over.
func (pi *PartitionedIntake) open(ctx context.Context, c cluster.Change, floor uint64, prev *part, handle func([]Message)) {
	var cons jetstream.Consumer
	for attempt := 1; ; attempt++ {
		octx, cancel := context.WithTimeout(ctx, pi.o.SetupTimeout)
		var err error
		cons, err = cluster.OpenConsumer(octx, pi.st, pi.o.Consumer, c.Partition, c.Epoch, cluster.ConsumerOptions{
			StartSeq: floor + 1, AckWait: pi.o.AckWait, MaxAckPending: pi.o.MaxAckPending, Replicas: pi.o.Replicas,
		})
		cancel()
		if err == nil {
			break
		}
		if ctx.Err() != nil {
			return // leaving
		}
		if errors.Is(err, cluster.ErrFenced) {
			// A change reported late: the partition has moved on already.
			pi.log.Info("partition already taken by a newer owner", "partition", c.Partition, "epoch", c.Epoch, "err", err)
			return
		}
		// The bus failed (a node restarting, a slow answer): the lease is
		// held, so try again. Meanwhile no change is read: if the bus
		// stays away, the Owner stops renewing, the lease lapses and the
		// next owner fences this one (the next attempt then says so).
		pi.log.Warn("partition consumer not opened; trying again", "partition", c.Partition, "epoch", c.Epoch, "attempt", attempt, "err", err)
		select {
		case <-ctx.Done():
			return
		case <-time.After(time.Second):
		}
	}
	in := newIntake(pi.nc, pi.o)
	in.cons = cons
	pctx, pcancel := context.WithCancel(ctx)
	pt := &part{p: c.Partition, epoch: c.Epoch, in: in, cancel: pcancel, done: make(chan struct{}), acked: floor, snapped: floor}
	pi.mu.Lock()
	if prev != nil {
		pt.handed, pt.mark, pt.acked, pt.snapped = prev.handed, prev.mark, prev.acked, prev.snapped
	}
	pi.parts[c.Partition] = pt
	pi.owned[c.Partition] = c.Epoch
	pi.mu.Unlock()
	pi.log.Info("partition gained", "partition", c.Partition, "epoch", c.Epoch, "consumer", cons.CachedInfo().Name, "reason", c.Reason, "replay_from", floor+1)
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
				return // lost, leaving or reopening: these come again
			}
			// A delivery lost in transit (a server restarting): what
			// follows it must not be applied before it, or the lost one
			// would be taken for applied. Hand over what precedes the
			// gap, then reopen the partition after what was handed over.
			n := len(batch)
			for i := range batch {
				d := batch[i].Delivery
				if d != 0 && pt.delivery != 0 && d != pt.delivery+1 {
					n = i
					break
				}
				if d != 0 {
					pt.delivery = d
				}
			}
			if n > 0 {
				handle(batch[:n])
				pi.mu.Lock()
				pt.handed = max(pt.handed, batch[n-1].Seq)
				pi.mu.Unlock()
			}
			if n < len(batch) {
				pi.log.Warn("partition delivery lost in transit; reopening after what was handed over",
					"partition", pt.p, "epoch", pt.epoch, "delivery", batch[n].Delivery, "expected", pt.delivery+1)
				pcancel()
				select {
				case pi.resume <- cluster.Change{Partition: pt.p, Epoch: pt.epoch, Gained: true, Reason: "reopen"}:
				default:
				}
			}
		})
		if err != nil {
			pi.log.Error("partition consumer stopped", "partition", pt.p, "epoch", pt.epoch, "err", err)
		}
	}()
}

// reopen restarts partition c.Partition's consumer at the same epoch,
// after what was handed over (a delivery was lost in transit): the
// consumer is deleted and created again with that start.
func (pi *PartitionedIntake) reopen(ctx context.Context, c cluster.Change, handle func([]Message)) {
	pi.mu.Lock()
	pt := pi.parts[c.Partition]
	pi.mu.Unlock()
	if pt == nil || pt.epoch != c.Epoch {
		return // lost meanwhile
	}
	<-pt.done
	pi.mu.Lock()
	from := max(pt.handed, pt.acked)
	pi.mu.Unlock()
	dctx, cancel := context.WithTimeout(ctx, pi.o.SetupTimeout)
	err := pi.st.DeleteConsumer(dctx, cluster.ConsumerName(pi.o.Consumer, c.Partition, c.Epoch))
	cancel()
	if err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
		pi.log.Warn("partition consumer not deleted for reopening", "partition", c.Partition, "err", err)
	}
	pi.open(ctx, c, from, pt, handle)
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
	pi.cover[c.Partition] = pt.acked
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
		pt  *part
		seq uint64
	}
	acks := make([]ack, 0, len(pi.parts))
	for _, pt := range pi.parts {
		if s := min(seq, pt.mark); s > 0 {
			acks = append(acks, ack{pt, s})
		}
	}
	pi.mu.Unlock()
	var errs []error
	for _, a := range acks {
		if err := a.pt.in.Ack(a.seq); err != nil {
			errs = append(errs, err)
			continue
		}
		pi.mu.Lock()
		a.pt.acked = max(a.pt.acked, a.seq)
		pi.mu.Unlock()
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
	var pts []*part
	var seqs []uint64
	for p, pt := range pi.parts {
		if s := min(seq, pt.mark); s > 0 && sel(p) {
			pts, seqs = append(pts, pt), append(seqs, s)
		}
	}
	pi.mu.Unlock()
	var errs []error
	for i, pt := range pts {
		if err := pt.in.Ack(seqs[i]); err != nil {
			errs = append(errs, err)
			continue
		}
		// The acknowledged floor, as Ack keeps it: the floor of the
		// partition's next snapshot.
		pi.mu.Lock()
		pt.acked = max(pt.acked, seqs[i])
		pi.mu.Unlock()
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

// SnapshotStore is the name of the object store of the partition
// snapshots of the intake stream called stream.
func SnapshotStore(stream string) string { return stream + "_SNAPSHOTS" }

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
	// The snapshot store, and a write, read and delete in it now: a
	// missing right fails the start, not the first handover.
	if pi.snapStore, err = cluster.EnsureSnapshotStore(ctx, js, SnapshotStore(o.Stream), o.Replicas); err != nil {
		return nil, err
	}
	// the probe has a bound of its own: right after the store is created
	// its stream may answer nobody for a few seconds (cluster.Settle)
	pctx, pcancel := context.WithTimeout(context.Background(), o.SetupTimeout)
	defer pcancel()
	if err := pi.snapStore.Probe(pctx, name); err != nil {
		return nil, err
	}
	pi.snapEvery = c.Cluster.SnapshotEvery
	pi.owner, err = cluster.NewOwner(js, kv, cluster.Options{
		Instance: name, Partitions: o.Partitions, Lease: c.Cluster.Lease, Logger: pi.log,
	})
	if err != nil {
		return nil, err
	}
	return pi, nil
}
