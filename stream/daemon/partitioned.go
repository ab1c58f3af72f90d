package daemon

import (
	"context"
	"errors"
	"maps"
	"slices"
	"strconv"

	"github.com/prometheus/client_golang/prometheus"

	"forewarn/engine/series"
	"forewarn/state"
	"forewarn/stream"
	"forewarn/stream/cluster"
)

// Handover of partitions between instances (cluster mode, issue 15): the
// daemon's side of stream.Handover.
//
// A new owner of a partition loads the partition's latest snapshot into
// the loop (restorePartition) before the partition's consumer starts at
// the snapshot's floor; the records' stream positions make the replay a
// no-op for what they already hold. This instance's own copy of a series
// (its memory, loaded from the local state file at start) is kept only if
// it comes from an epoch of this instance's no older than the snapshot's:
// lastOwned remembers, per partition, the epoch at which this instance
// last owned it (0 after a start: the local file's records yield to any
// snapshot). When it keeps its own copies, the replay starts no later
// than what the copies are known to reflect (stream.PartitionedIntake
// tracks it), for an older epoch's snapshot may have a later floor than
// those copies (a paused owner's late snapshot). The snapshots themselves are read from the local state file
// (partitionRecords), on the intake's snapshot goroutine.

// handover is the cluster-mode state of the daemon, set in New and read
// only afterwards. The epochs at which this instance last owned each
// partition (lastOwned) are each loop's own (loop.lastOwned): a partition
// never changes loop (route.go), so only its loop writes or reads them.
type handover struct {
	pi   *stream.PartitionedIntake
	gaps *prometheus.CounterVec
}

// enableHandover wires pi's snapshots to the daemon and registers
// forewarn_cluster_replay_gaps_total, every partition's at 0.
func (d *Daemon) enableHandover(pi *stream.PartitionedIntake) error {
	h := &handover{pi: pi}
	h.gaps = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: "forewarn_cluster_replay_gaps_total",
		Help: "Partitions taken over whose replay the intake stream could no longer serve whole (messages after the snapshot's floor removed by the stream's limits); their series were rebuilt from what remained.",
	}, []string{"partition"})
	for p := range d.cfg.Cluster.Partitions {
		h.gaps.WithLabelValues(strconv.Itoa(p))
	}
	if err := d.metrics.Registry.Register(h.gaps); err != nil {
		return err
	}
	d.handover = h
	return pi.EnableHandover(stream.Handover{
		Restore: d.restoreOnLoop,
		Records: d.partitionRecords,
		Gap: func(p int, floor, first uint64) {
			h.gaps.WithLabelValues(strconv.Itoa(p)).Inc()
		},
	})
}

// leave stores the final snapshots and releases the leases (shutdown,
// after the last flush is acknowledged).
func (d *Daemon) leave() {
	if d.handover == nil {
		return
	}
	if err := d.handover.pi.Leave(); err != nil {
		d.log.Warn("cluster: leaving", "err", err)
	}
}

var errStopped = errors.New("daemon: stopped")

// restoreOnLoop runs restorePartition on the loop that owns partition p
// (route.go: p mod loops) and waits for it.
func (d *Daemon) restoreOnLoop(ctx context.Context, p int, epoch uint64, snap *cluster.Snapshot) (keptOwn bool, err error) {
	l := d.loops[d.route.loopOfPartition(p)]
	res := make(chan bool, 1)
	f := func() { res <- l.restorePartition(p, epoch, snap) }
	select {
	case l.inspect <- f:
	case <-ctx.Done():
		return false, ctx.Err()
	case <-l.exited:
		return false, errStopped
	case <-d.done:
		return false, errStopped
	}
	select {
	case kept := <-res:
		return kept, nil
	case <-d.done:
		return false, errStopped
	}
}

// ownerEpoch returns the partition of topic and the epoch at which this
// instance last owned it, for the owner headers of its forecasts; ok is
// false outside cluster mode. A former owner that publishes late (it was
// paused past its lease) sends its old epoch. Loop only: the epochs are
// the loop's (lastOwned).
func (l *loop) ownerEpoch(topic string) (part int, epoch uint64, ok bool) {
	if l.top.handover == nil {
		return 0, 0, false
	}
	p, ok := l.top.partitionOf(topic)
	if !ok {
		return 0, 0, false
	}
	return p, l.lastOwned[p], l.lastOwned[p] != 0
}

// partitionOf returns the partition of a topic (ok false: none).
func (d *Daemon) partitionOf(topic string) (int, bool) {
	return d.handover.pi.PartitionOfTopic(topic)
}

// restorePartition makes partition p's series, now owned at epoch, what
// snap holds (on the loop). First the partition's series finish their
// refits and alert evaluations, and the flush in progress is written, so
// that no job and no record in flight refers to an entry replaced here.
// Then, unless this instance's own copies are of an epoch no older than
// the snapshot's, every series of the partition becomes the snapshot's
// record, and a series the snapshot does not hold is dropped (its record
// too): the replay from the snapshot's floor rebuilds it. The installed
// series are written at the next flush, before the partition's first
// acknowledgement. It reports whether it kept this instance's own copies
// (stream.Handover.Restore's keptOwn).
func (d *loop) restorePartition(p int, epoch uint64, snap *cluster.Snapshot) (keptOwn bool) {
	inP := func(topic string) bool {
		q, ok := d.top.partitionOf(topic)
		return ok && q == p
	}
	for {
		held := false
		for t, e := range d.series {
			if e.held() && inP(t) {
				held = true
				break
			}
		}
		if !held {
			break
		}
		d.jobStep()
	}
	d.finishFlush()
	own := d.lastOwned[p]
	d.lastOwned[p] = epoch
	if snap == nil {
		d.log.Info("partition taken without a snapshot; replayed from the start of the stream", "partition", p, "epoch", epoch)
		return false
	}
	useOwn := own >= snap.Epoch
	recs := make(map[string]*series.Snapshot, len(snap.Records))
	for i, b := range snap.Records {
		s, err := state.Decode(b)
		if err != nil {
			d.log.Error("snapshot record unreadable; its series is rebuilt from what the stream still holds", "partition", p, "record", i, "err", err)
			d.metrics.StateResets.Inc()
			continue
		}
		recs[s.Topic] = s
	}
	if !useOwn {
		for t := range d.series {
			if _, ok := recs[t]; !ok && inP(t) {
				d.drop(t)
				if err := d.top.store.Delete(t); err != nil {
					d.log.Warn("stale record of a partition taken over not deleted", "topic", t, "err", err)
				}
			}
		}
	}
	var due []string
	for _, t := range slices.Sorted(maps.Keys(recs)) {
		if useOwn && d.series[t] != nil {
			continue
		}
		rec := recs[t]
		sc, ok := d.cfg.SeriesFor(t)
		if !ok {
			d.log.Info("series of a snapshot no longer matches any series entry; dropped", "topic", t)
			d.drop(t)
			continue
		}
		s, err := series.Restore(rec, settingsOf(sc, rec.Kind))
		if err != nil {
			d.log.Warn("snapshot record does not fit the settings; the series starts afresh", "topic", t, "err", err)
			d.metrics.StateResets.Inc()
			d.drop(t)
			continue
		}
		e := &entry{s: s, subject: d.pub.forecastSubject(t), rules: d.top.rulesFor(t, sc), dirty: true}
		if d.series[t] == nil {
			// limits.max_series counts it, as load does: a snapshot's
			// series are taken whatever the count.
			d.top.nseries.Add(1)
			d.metrics.Series.Inc()
		}
		d.series[t] = e
		if s.HasModel() {
			d.pub.storeLatest(s, d.now())
		}
		if s.FitDue() {
			due = append(due, t)
		}
	}
	for _, t := range due {
		d.outcome(t, d.series[t], series.NeedFit)
	}
	d.log.Info("partition snapshot loaded", "partition", p, "epoch", epoch, "snapshot_epoch", snap.Epoch,
		"floor", snap.Floor, "records", len(recs), "own_copies_kept", useOwn)
	return useOwn
}

// drop removes topic's series from the loop, if it has one, and from
// the count of limits.max_series. Loop only, with no job or flush in
// flight for it (restorePartition).
func (d *loop) drop(topic string) {
	if _, ok := d.series[topic]; !ok {
		return
	}
	delete(d.series, topic)
	d.top.nseries.Add(-1)
	d.metrics.Series.Dec()
}

// partitionRecords reads the stored records of the series of partitions
// ps from the state file, for their snapshots (any goroutine).
func (d *Daemon) partitionRecords(ps []int) (map[int][][]byte, error) {
	out := make(map[int][][]byte, len(ps))
	err := d.store.LoadAll(func(topic string, s *series.Snapshot, err error) error {
		if err != nil {
			return nil // unreadable: set aside at load, its series rebuilt
		}
		q, ok := d.partitionOf(topic)
		if ok && slices.Contains(ps, q) {
			out[q] = append(out[q], state.Encode(nil, s))
		}
		return nil
	})
	return out, err
}
