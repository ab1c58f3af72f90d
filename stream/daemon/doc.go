// Package daemon runs forewarn: it takes messages from the intake, applies
// them to their series in order, runs refits in a bounded worker pool,
// publishes forecasts, alerts and rejects, and writes the series state in
// batched transactions, acknowledging the stream only once the effect of
// a message is on disk.
//
// # Parts
//
// Each part is a type in a file of its own that owns its goroutines and
// its state; they talk through channels, and the loop drives them all:
//
//   - the loop (Daemon, daemon.go and loop.go) routes every message to
//     its series and owns the series map and every entry in it;
//   - Intake (intake.go) is the consumer-side interface of the source:
//     Run, Subscribed, Ack; a stream.Intake unless Options.Intake names
//     another, or a stream.PartitionedIntake when cluster.partitions > 0
//     (one loop serves every partition the instance owns; an intake of
//     several consumers also implements Marker, so that each consumer is
//     acknowledged only up to what it had handed over when the flush
//     began);
//   - refitPool (refits.go) runs series.FitJob on Refit.Workers workers;
//   - alertPool (alerts.go) runs the alert evaluations that need a
//     simulation on one worker per GOMAXPROCS;
//   - publisher (publisher.go) runs the encoder and keeps the latest
//     forecast of each topic;
//   - flusher (flusher.go) encodes the records into a state.Batch, runs
//     the writer that commits it, and acknowledges the intake;
//   - in cluster mode the handover (partitioned.go): a gained partition's
//     snapshot is installed on the loop (Inspect's channel) before its
//     consumer starts, after the partition's jobs and the flush in
//     progress are finished; the intake's snapshot goroutine reads the
//     records back from the state file (state.Store is safe for that);
//     forecasts carry the owner headers (stream.PartitionHeader,
//     stream.EpochHeader); shutdown ends with Leave (final snapshots at
//     the acknowledged floors, then the leases go).
//
// # Goroutines and what they own
//
//	goroutine        owns                                     talks through
//	loop (Run)       series map, entries, pending counts,     batches/handled, inspect,
//	                 refit and alert queues, free alert jobs, refitPool.jobs/results,
//	                 the flusher's fields (but batch while    alertPool.jobs/done,
//	                 writing), the publisher's encBuf         publisher.free/out,
//	                                                          flusher.writes/committed
//	intake (Run)     whatever the Intake holds                batches → loop, waits on handled
//	refit worker ×n  the FitJob it holds (a window copy)      jobs → result on results
//	alert worker ×n  the alertJob it holds, its Evaluator     jobs → the job back on done
//	encoder          the slots it holds, its encode buffer    out → slot back on free;
//	                                                          writes latest under mu
//	writer           flusher.batch from a send on writes      writes → result on committed
//	                 until the loop receives from committed
//
// Inspect runs a function on the loop, which may read the series there.
// Latest and the query responder read the publisher's latest messages from
// any goroutine; the encoder, and the loop while it loads the state, write
// them, all under publisher.mu.
//
// # Lock order
//
// There is one lock, publisher.mu (the latest forecasts, for queries and
// pages). It is held for a map access only: never while a channel, a job
// or another lock is waited on. With no second lock there is no order to
// keep; a part that adds one must write its order here.
//
// # Ownership and order
//
// One loop goroutine owns every series. Refits run on worker goroutines on
// a copy of the window (series.FitJob); while a series refits, its later
// observations wait in its queue and are applied, in order, once the new
// model is installed. Other series carry on. Forecasts therefore depend on
// data time only. Alert evaluations that need a simulation work the same
// way (series.AlertWork on the alert workers, the series held meanwhile;
// DEVELOPERS.md, "The alert pool"). Forecasts travel to the encoder on the
// model scale in preallocated slots, so a bucket close allocates nothing.
// Only one write is in flight; a flush asked for meanwhile waits for the
// next trigger and then writes everything that changed since.
//
// # What is acknowledged
//
// Each series' record holds the stream position it reflects (message and
// observation within it), so a redelivered message has no effect. After a
// flush the stream is acknowledged (Intake.Ack, all up to a position) up
// to the last position such that nothing at or before it still waits on a
// refit or an alert evaluation; the record of a series whose alert
// evaluation is away is not written, and the acknowledgement stops before
// what it applied since its last record.
//
// # Shutdown
//
// When the context is cancelled: stop the intake (the batch in hand is
// finished), finish the refits in flight and apply what waited on them,
// finish the alert evaluations queued (what waited on those stays
// unapplied and unacknowledged, for redelivery), stop both pools,
// let the encoder publish what it holds, write the state and wait for the
// commit, acknowledge, stop the writer, flush the publisher.
package daemon
