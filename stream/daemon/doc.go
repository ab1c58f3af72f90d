// Package daemon runs forewarn: it takes messages from the intake, applies
// them to their series in order, runs refits in a bounded worker pool,
// publishes forecasts, alerts and rejects, and writes the series state in
// batched transactions, acknowledging the stream only once the effect of
// a message is on disk.
//
// # Parts
//
// Each part is a type in a file of its own that owns its goroutines and
// its state; they talk through channels. A daemon runs one or more loops
// (intake.loops), each driving its own parts:
//
//   - a loop (loop.go) applies every message of its share of the intake
//     to its series and owns its series map and every entry in it;
//   - routing (route.go): partitions are the unit of parallelism. Each
//     loop owns the partitions p with p mod loops = its index: with
//     cluster.partitions N > 0 the stream's partitions (by subject), in
//     single-instance mode as many internal partitions as loops (by
//     topic, the same FNV-1a hash). dispatch, the Intake's handler, splits
//     each batch among the loops;
//   - Intake (intake.go) is the consumer-side interface of the source:
//     Run, Subscribed, Ack; a stream.Intake unless Options.Intake names
//     another, or a stream.PartitionedIntake when cluster.partitions > 0
//     (an intake of several consumers also implements Marker, so that
//     each consumer is acknowledged only up to what it had handed over
//     when the flush began, and PartMarker, so that each loop marks and
//     acknowledges only its own partitions' consumers);
//   - refitWorkers and alertWorkers (refits.go, alerts.go) are shared by
//     every loop: refit.workers refit workers and one alert worker per
//     GOMAXPROCS, as with one loop, so that the keys keep their meaning
//     and a busy loop can use the cores a quiet one leaves. Each loop has
//     its side of them (refitPool, alertPool: its queue, its result
//     channel, its evaluator for the cheap screens), and each job carries
//     the channel of the loop that sent it;
//   - publisher (publisher.go), one per loop, runs that loop's encoder
//     and keeps the latest forecast of each of its topics;
//   - flusher (flusher.go), one per loop, encodes the loop's records into
//     a state.Batch, runs the writer that commits it (the one state file's
//     Commit serialises the loops' writes), and acknowledges through the
//     loop's acker: the intake itself (one loop), its own partitions
//     (PartMarker), or ackJoin, which acknowledges the one consumer up to
//     the lowest floor every loop has written;
//   - in cluster mode the handover (partitioned.go): a gained partition's
//     snapshot is installed on the loop that owns the partition (that
//     loop's inspect channel, restoreOnLoop) before its consumer starts,
//     after the partition's jobs and that loop's flush in progress are
//     finished; each loop keeps the epochs at which this instance last
//     owned its partitions (loop.lastOwned), for the owner headers of its
//     forecasts (stream.PartitionHeader, stream.EpochHeader); the intake's
//     snapshot goroutine reads the records back from the state file
//     (state.Store is safe for that); shutdown ends with Leave (final
//     snapshots at the acknowledged floors, then the leases go).
//
// # Goroutines and what they own
//
//	goroutine        owns                                     talks through
//	loop ×L (run)    its series map, entries, pending counts, batches ← dispatch, inspect,
//	                 refit and alert queues, free alert jobs, refitPool.jobs/results,
//	                 its flusher's fields (but batch while    alertPool.jobs/done,
//	                 writing), its publisher's encBuf, its    publisher.free/out,
//	                 partitions' epochs (lastOwned)           flusher.writes/committed
//	intake (Run)     whatever the Intake holds; dispatch's    batches → loops; waits for
//	                 per-call state (one call at a time per   them (one loop, or a Marker
//	                 partition consumer)                      intake) or not (ackJoin);
//	                                                          a restore → its loop's inspect,
//	                                                          waits for the result
//	snapshots        nothing of the daemon's (cluster mode:   reads the state file
//	(intake's)       partitionRecords)                        (state.Store)
//	refit worker ×n  the FitJob it holds (a window copy)      jobs → result on its loop's results
//	alert worker ×n  the alertJob it holds, its Evaluator     jobs → the job back on its loop's done
//	encoder ×L       the slots it holds, its encode buffer    out → slot back on free;
//	                                                          writes latest under mu
//	writer ×L        its flusher's batch from a send on       writes → result on committed
//	                 writes until its loop receives from
//	                 committed
//	Run              the loops' state once they have exited   (shutdown: final flushes)
//
// Inspect pauses every loop (each runs a function that waits, from its
// select or from jobStep, so that no loop waits on a worker held by a
// paused one), reads the series of all of them, and releases them. Latest
// and the query responder read a publisher's latest messages from any
// goroutine; its encoder, and Run while it loads the state, write them,
// all under that publisher's mu. OnForecast and OnAlert run on the loops,
// one at a time (hookMu).
//
// # Lock order
//
// publisher.mu (one per loop: the latest forecasts, for queries and
// pages) is held for a map access only. hookMu is held while OnForecast or
// OnAlert runs, and nothing else is taken under it. ackJoin.mu is held
// while Intake.Ack runs (the intake's own locks come after it, never
// before); a loop holds no other lock when it takes it. None of them is
// held while a channel, a job or another of them is waited on, so there
// is no order between them to keep; a part that adds a lock must write
// its order here.
//
// # Ownership and order
//
// Each series is owned by one loop, the owner of its partition; a
// partition's loop is fixed for the life of the daemon (p mod loops), and
// in cluster mode a partition moves only between instances, at an
// ownership change. A series' messages reach its loop in stream order. Refits run on worker
// goroutines on a copy of the window (series.FitJob); while a series
// refits, its later observations wait in its queue and are applied, in
// order, once the new model is installed. Other series carry on.
// Forecasts therefore depend on data time only, and not on the number of
// loops (TestLoopsDeterminism). Alert evaluations that need a simulation
// work the same way (series.AlertWork on the alert workers, the series
// held meanwhile; DEVELOPERS.md, "The alert pool"). Forecasts travel to
// the encoder on the model scale in preallocated slots, so a bucket close
// allocates nothing. Only one write per loop is in flight; a flush asked
// for meanwhile waits for the next trigger and then writes everything of
// that loop that changed since. limits.max_series counts the series of
// every loop together; which new series reach it first then depends on
// the loops' pace, as it depends on arrival order with one loop.
//
// # What is acknowledged
//
// Each series' record holds the stream position it reflects (message and
// observation within it), so a redelivered message has no effect. After a
// flush the stream is acknowledged (Intake.Ack, all up to a position) up
// to the last position such that nothing at or before it still waits on a
// refit or an alert evaluation; the record of a series whose alert
// evaluation is away is not written, and the acknowledgement stops before
// what it applied since its last record. With several loops on one
// consumer, each loop is told the last position of every batch (work.upTo,
// an empty share if it has no message in it), so its floor covers every
// position it owns up to there, and ackJoin acknowledges the lowest floor
// every loop has written.
//
// # Shutdown
//
// When the context is cancelled: stop the intake (the batches in hand are
// handed to the loops), then each loop applies what it was handed,
// finishes the refits in flight and applies what waited on them, and
// finishes the alert evaluations queued (what waited on those stays
// unapplied and unacknowledged, for redelivery); once every loop has
// exited, stop both worker pools, and for each loop let the encoder
// publish what it holds, write the state and wait for the commit, and
// acknowledge; in cluster mode then leave (Leave: the final snapshots at
// the acknowledged floors, then the leases go); last, for each loop, stop
// the writer and flush the publisher. The same finish ends a start whose
// intake stopped before it subscribed.
package daemon
