// Package daemon runs forewarn: it takes messages from the intake, applies
// them to their series in order, runs refits in a bounded worker pool,
// publishes forecasts, alerts and rejects, and writes the series state in
// batched transactions, acknowledging the stream only once the effect of
// a message is on disk.
//
// # Ownership and order
//
// One loop goroutine owns every series. Refits run on worker goroutines on
// a copy of the window (series.FitJob); while a series refits, its later
// observations wait in its queue and are applied, in order, once the new
// model is installed. Other series carry on. Forecasts therefore depend on
// data time only. Alert evaluations that need a simulation work the same
// way (series.AlertWork on the alert workers, the series held meanwhile;
// DEVELOPERS.md, "The alert pool").
//
// # Goroutines
//
// Besides the loop: the refit workers (Refit.Workers); the alert workers
// (one per GOMAXPROCS), each with its own alert.Evaluator, touching only
// the job they hold; one encoder, which
// turns forecasts into raw units, encodes, publishes and keeps the latest
// forecast of each topic, in the order the loop made them (forecasts
// travel on the model scale in preallocated slots, so a bucket close
// allocates nothing); and one writer, which commits the
// records the loop encoded into a state.Batch and hands the result back.
// Only one write is in flight; a flush asked for meanwhile waits for the
// next trigger and then writes everything that changed since.
//
// # What is acknowledged
//
// Each series' record holds the stream position it reflects (message and
// observation within it), so a redelivered message has no effect. After a
// flush the stream is acknowledged (AckAll) up to the last position such
// that nothing at or before it still waits on a refit or an alert
// evaluation; the record of a series whose alert evaluation is away is not
// written, and the acknowledgement stops before what it applied since its
// last record.
//
// # Shutdown
//
// When the context is cancelled: stop the intake (the batch in hand is
// finished), finish the refits in flight and apply what waited on them,
// finish the alert evaluations queued (what waited on those stays
// unapplied and unacknowledged, for redelivery),
// let the encoder publish what it holds, write the state and wait for the
// commit, acknowledge, flush the publisher.
package daemon
