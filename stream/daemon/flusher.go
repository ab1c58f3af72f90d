package daemon

import (
	"log/slog"

	"forewarn/state"
)

// flusher writes the series' records and acknowledges the stream once
// they are on disk.
//
// The records are encoded on the loop into one state.Batch, flushChunk at
// a time between messages (step), so that a flush never stalls the loop
// for long; the writer goroutine commits the batch and hands the result
// back on committed; the loop then acknowledges (Intake.Ack). Only one
// write is in flight: a flush asked for meanwhile is skipped, and the
// next trigger writes everything that changed since.
//
// Everything here is the loop's, except batch, which the writer owns from
// the send on writes until the loop receives from committed.
type flusher struct {
	store     *state.Store
	acks      acker // the loop's way to mark and acknowledge the intake
	log       *slog.Logger
	metrics   *Metrics
	writes    chan writeJob  // loop → writer: commit batch
	committed chan writeDone // writer → loop
	done      chan struct{}  // closed when the writer returns

	// Loop-owned.
	batch     state.Batch // records of the write in flight (owned by the writer while writing)
	writing   bool
	sinceSave int // messages handled since the last flush began
	// A flush in progress: toFlush[flushed:] still to encode; floor is
	// the position it acknowledges.
	toFlush []*entry
	flushed int
	floor   uint64
	acked   uint64 // highest position acknowledged
}

type writeJob struct{ floor uint64 }

type writeDone struct {
	floor uint64
	err   error
}

// flushChunk is how many records one step encodes: with records of a few
// kilobytes, well under a millisecond of the loop.
const flushChunk = 256

func newFlusher(store *state.Store, a acker, log *slog.Logger, m *Metrics) *flusher {
	return &flusher{
		store:     store,
		acks:      a,
		log:       log,
		metrics:   m,
		writes:    make(chan writeJob),
		committed: make(chan writeDone, 1),
		done:      make(chan struct{}),
	}
}

// start runs the writer.
func (f *flusher) start() {
	go func() {
		defer close(f.done)
		for j := range f.writes {
			f.committed <- writeDone{floor: j.floor, err: f.store.Commit(&f.batch)}
		}
	}()
}

// stop ends the writer; no write may be in flight.
func (f *flusher) stop() {
	close(f.writes)
	<-f.done
}

// busy reports whether a flush is being encoded or written.
func (f *flusher) busy() bool { return f.writing || len(f.toFlush) > 0 }

// encoding reports whether a flush has records left to encode (step).
func (f *flusher) encoding() bool { return len(f.toFlush) > 0 }

// begin starts a flush of every changed series of all, acknowledging up
// to floor once written (loop.flush); the flusher must not be busy.
// The floor is taken when the flush starts: every record encoded
// afterwards reflects at least that position.
func (f *flusher) begin(all map[string]*entry, floor uint64) {
	f.sinceSave = 0
	f.batch.Reset()
	for _, e := range all {
		if e.dirty {
			f.toFlush = append(f.toFlush, e)
		}
	}
	f.floor = floor
	f.acks.mark()
	if len(f.toFlush) == 0 {
		f.ack(f.floor) // nothing new to store: every earlier write has committed
		return
	}
	f.step()
}

// step encodes the next chunk of the flush in progress and, after the
// last one, hands the batch to the writer.
func (f *flusher) step() {
	end := min(f.flushed+flushChunk, len(f.toFlush))
	for _, e := range f.toFlush[f.flushed:end] {
		if e.alerting || e.s.FitOwed() {
			// Its record says its latest close is applied, but not yet that
			// close's alert evaluation: stored, a restart would skip the
			// close (Series.Handled) and the evaluation would never happen.
			// Likewise a refit owed inside a message (left so by a shutdown
			// between two of its observations): restored, it would run at
			// once, at another bucket (series.FitOwed).
			// It stays dirty for the next flush, and this flush
			// acknowledges nothing it has applied since its last record.
			if e.firstDirty > 0 && e.firstDirty-1 < f.floor {
				f.floor = e.firstDirty - 1
			}
			continue
		}
		if err := f.batch.Add(e.s.Snapshot()); err != nil {
			f.log.Error("series state cannot be stored", "topic", e.s.Topic(), "err", err)
			f.metrics.StateWriteFailures.Inc()
			continue
		}
		e.dirty, e.firstDirty = false, 0
	}
	f.flushed = end
	if end < len(f.toFlush) {
		return
	}
	clear(f.toFlush)
	f.toFlush, f.flushed = f.toFlush[:0], 0
	if f.batch.Len() == 0 {
		f.ack(f.floor)
		return
	}
	f.writing = true
	f.writes <- writeJob{floor: f.floor}
}

// ackFloor is the last stream position whose effect is in memory with
// nothing at or before it still waiting on a refit or an alert
// evaluation, nor applied to a series whose record cannot be written
// until its alert evaluation is back (see flusher.step); last is the
// highest position handled.
func ackFloor(all map[string]*entry, last uint64) uint64 {
	floor := last
	for _, e := range all {
		if len(e.pending) > 0 && e.pending[0].seq > 0 && e.pending[0].seq-1 < floor {
			floor = e.pending[0].seq - 1
		}
		if (e.alerting || e.s.FitOwed()) && e.firstDirty > 0 && e.firstDirty-1 < floor {
			floor = e.firstDirty - 1
		}
	}
	return floor
}

// written finishes a write: acknowledge what it stored, or, when it
// failed, mark every series of all changed so that the next flush writes
// them.
func (f *flusher) written(w writeDone, all map[string]*entry) {
	f.writing = false
	if w.err != nil {
		f.log.Error("state write failed; will retry at the next flush", "err", w.err)
		f.metrics.StateWriteFailures.Inc()
		// The failed records' series may hold anything after the last
		// acknowledged position unstored.
		for _, e := range all {
			e.dirty = true
			if e.firstDirty == 0 || e.firstDirty > f.acked+1 {
				e.firstDirty = f.acked + 1
			}
		}
		return
	}
	if size, err := f.store.Size(); err == nil {
		f.metrics.StateBytes.Set(float64(size))
	}
	f.ack(w.floor)
}

func (f *flusher) ack(floor uint64) {
	if floor <= f.acked && !f.acks.every() {
		return
	}
	if err := f.acks.ack(floor); err != nil {
		f.log.Warn("acknowledgement failed; the stream will redeliver (no effect twice)", "seq", floor, "err", err)
		return
	}
	f.acked = max(f.acked, floor)
}

// finish encodes the rest of the flush in progress and waits for its
// write.
func (f *flusher) finish(all map[string]*entry) {
	for len(f.toFlush) > 0 {
		f.step()
	}
	if f.writing {
		f.written(<-f.committed, all)
	}
}
