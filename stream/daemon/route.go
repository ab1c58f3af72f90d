package daemon

import (
	"slices"
	"sync"

	"forewarn/config"
	"forewarn/stream"
	"forewarn/stream/cluster"
)

// Routing: the intake's batches are split among the loops by partition,
// and each loop owns the partitions p with p mod loops = its index.
//
// With cluster.partitions N > 0 the partition is the stream's own,
// cluster.Partition(subject, N) of the subject as published, so that a
// loop owns whole consumers and acknowledges them itself (PartMarker). In
// single-instance mode there is no stream partition; the daemon cuts the
// topics into as many internal partitions as loops, with the same hash
// over the topic (not the subject: a topic may arrive on several intake
// subjects, and must stay on one loop). One mechanism, two keys: in both
// a series is owned by exactly one loop for as long as its partition is,
// and its messages reach that loop in stream order, so a series' results
// do not depend on the number of loops.
type router struct {
	cfg     *config.Config
	loops   int
	parts   int  // partitions: cluster.partitions, or loops
	cluster bool // partitions are the stream's (by subject)
}

func newRouter(c *config.Config, loops int) router {
	r := router{cfg: c, loops: loops, parts: loops}
	if c.Cluster.Partitions > 0 {
		r.parts, r.cluster = c.Cluster.Partitions, true
	}
	return r
}

// loopOf is the loop of a message. A message with no topic goes to loop 0,
// which rejects it.
func (r router) loopOf(m *stream.Message) int {
	if r.loops == 1 {
		return 0
	}
	if r.cluster {
		return cluster.Partition(m.Subject, r.parts) % r.loops
	}
	topic, ok := r.cfg.TopicOf(m.Subject)
	if !ok {
		return 0
	}
	return cluster.Partition(topic, r.parts) % r.loops
}

// loopOfTopic is the loop of a topic's series: in cluster mode that of
// the subject it is published on under the first intake subject that can
// carry it (stream.PartitionedIntake.PartitionOfTopic), the subject the
// instances' query ownership assumes too.
func (r router) loopOfTopic(topic string) int {
	if r.loops == 1 {
		return 0
	}
	if !r.cluster {
		return cluster.Partition(topic, r.parts) % r.loops
	}
	prefixes := r.cfg.Prefixes()
	for i, pat := range r.cfg.Intake.Subjects {
		if subj := prefixes[i] + topic; config.MatchSubject(pat, subj) {
			return cluster.Partition(subj, r.parts) % r.loops
		}
	}
	return 0
}

// loopOfPartition is the loop that owns partition p (cluster mode: a
// stream partition, whose snapshot restorePartition installs there).
func (r router) loopOfPartition(p int) int { return p % r.loops }

// owns returns the partitions loop k owns, as a filter.
func (r router) owns(k int) func(p int) bool {
	n := r.loops
	return func(p int) bool { return p%n == k }
}

// work is one loop's share of one intake batch.
type work struct {
	msgs []stream.Message
	// upTo is the last stream position of the whole batch: once the loop
	// has applied msgs, nothing at or before it that this loop owns waits
	// in the intake.
	upTo uint64
	wg   *sync.WaitGroup   // synchronous dispatch: Done once applied
	buf  *[]stream.Message // pipelined dispatch: msgs' array, back to msgPool
}

// loopQueue is how many batches a loop may have waiting.
const loopQueue = 4

var msgPool = sync.Pool{New: func() any { return new([]stream.Message) }}

// dispatchCall is one synchronous dispatch's state.
type dispatchCall struct {
	wg    sync.WaitGroup
	parts [][]stream.Message
}

var callPool = sync.Pool{New: func() any { return new(dispatchCall) }}

// dispatch hands one intake batch to the loops (the Intake's handle).
//
// With one loop, or with an intake that marks what it has handed over
// (Marker: a partition's consumer counts a batch as applied when handle
// returns), it returns once every loop has applied its share. With
// several loops on one acknowledgement floor it returns once the shares
// are queued (copies of the Messages, whose Data the Intake never reuses):
// each loop then goes at its own pace, and every loop is told the batch's
// last position (an empty share if need be) for its floor (ackJoin).
// dispatch may be called from several goroutines at once (one per
// partition): each call has its own state.
func (d *Daemon) dispatch(batch []stream.Message) {
	if len(batch) == 0 {
		return
	}
	upTo := batch[len(batch)-1].Seq
	if len(d.loops) == 1 {
		c := callPool.Get().(*dispatchCall)
		c.wg.Add(1)
		d.loops[0].batches <- work{msgs: batch, upTo: upTo, wg: &c.wg}
		c.wg.Wait()
		callPool.Put(c)
		return
	}
	if d.acks == nil { // synchronous: the intake marks what it handed over
		c := callPool.Get().(*dispatchCall)
		if len(c.parts) != len(d.loops) {
			c.parts = make([][]stream.Message, len(d.loops))
		}
		for i := range batch {
			k := d.route.loopOf(&batch[i])
			c.parts[k] = append(c.parts[k], batch[i])
		}
		for k, p := range c.parts {
			if len(p) > 0 {
				c.wg.Add(1)
				d.loops[k].batches <- work{msgs: p, upTo: upTo, wg: &c.wg}
			}
		}
		c.wg.Wait()
		for k := range c.parts {
			clear(c.parts[k])
			c.parts[k] = c.parts[k][:0]
		}
		callPool.Put(c)
		return
	}
	var bufs [maxInlineLoops]*[]stream.Message
	parts := bufs[:0]
	if len(d.loops) > maxInlineLoops {
		parts = make([]*[]stream.Message, 0, len(d.loops))
	}
	for range d.loops {
		parts = append(parts, nil)
	}
	for i := range batch {
		k := d.route.loopOf(&batch[i])
		if parts[k] == nil {
			parts[k] = msgPool.Get().(*[]stream.Message)
		}
		*parts[k] = append(*parts[k], batch[i])
	}
	for k, p := range parts {
		switch {
		case p != nil:
			d.loops[k].batches <- work{msgs: *p, upTo: upTo, buf: p}
		case upTo > 0: // durable: the loop's floor moves on too
			d.loops[k].batches <- work{upTo: upTo}
		}
	}
}

// maxInlineLoops is how many loops dispatch serves without allocating.
const maxInlineLoops = 16

// done finishes a share on its loop, once applied.
func (w *work) done() {
	if w.buf != nil {
		clear(*w.buf)
		*w.buf = (*w.buf)[:0]
		msgPool.Put(w.buf)
	}
	if w.wg != nil {
		w.wg.Done()
	}
}

// acker is how a loop's flusher marks and acknowledges the intake.
type acker interface {
	// mark is called when a flush takes its floor.
	mark()
	// ack acknowledges up to floor, once the flush's records are written.
	ack(floor uint64) error
	// every: acknowledge after every flush, even at a floor acknowledged
	// before (a marking intake: a consumer behind the others advances
	// below it).
	every() bool
}

// directAcker is the one loop's: the intake itself.
type directAcker struct{ in Intake }

func (a directAcker) mark() {
	if m, ok := a.in.(Marker); ok {
		m.Mark()
	}
}
func (a directAcker) ack(floor uint64) error { return a.in.Ack(floor) }
func (a directAcker) every() bool            { _, ok := a.in.(Marker); return ok }

// partAcker marks and acknowledges only the partitions its loop owns,
// on their own consumers (cluster mode, several loops).
type partAcker struct {
	pm  PartMarker
	sel func(p int) bool
}

func (a partAcker) mark()                  { a.pm.MarkWhere(a.sel) }
func (a partAcker) ack(floor uint64) error { return a.pm.AckWhere(floor, a.sel) }
func (a partAcker) every() bool            { return true }

// joinAcker reports its loop's floor to the ackJoin (several loops on one
// consumer).
type joinAcker struct {
	j *ackJoin
	k int
}

func (a joinAcker) mark()                  {}
func (a joinAcker) ack(floor uint64) error { return a.j.ack(a.k, floor) }
func (a joinAcker) every() bool            { return false }

// ackJoin acknowledges one consumer for several loops: up to the lowest
// of the floors they have written. A loop's floor covers every position
// up to it that the loop owns (work.upTo), so their minimum covers every
// position. mu is held while Intake.Ack runs (doc.go, "Lock order").
type ackJoin struct {
	mu     sync.Mutex
	in     Intake
	floors []uint64 // per loop, the highest floor written
	acked  uint64
}

func (j *ackJoin) ack(k int, floor uint64) error {
	j.mu.Lock()
	defer j.mu.Unlock()
	j.floors[k] = max(j.floors[k], floor)
	m := slices.Min(j.floors)
	if m <= j.acked {
		return nil
	}
	if err := j.in.Ack(m); err != nil {
		return err
	}
	j.acked = m
	return nil
}
