// Package stream moves forewarn's messages on the NATS bus and encodes
// them. It never computes forecasts: the values it encodes come from
// package engine/series, ready-made.
//
// What it owns:
//
//   - StartEmbedded runs the in-process NATS server (JetStream on, store
//     under the daemon's data dir) used when no external server is named.
//   - Connect connects to a server with the credentials and TLS of an Auth,
//     reconnecting forever with backoff.
//   - ParsePayload reads one intake message body (CONTRACT.md §2: an
//     object, an array of objects, or a bare number) into Observations, or
//     returns a *Reject with a snake_case code and a reason a person can act
//     on. It is the hot path of intake: a strict hand-written scanner, no
//     reflection, no allocation per observation in the common case.
//   - Intake takes messages off the bus and hands them in batches, in
//     order, to one handler goroutine.
//   - PartitionedIntake (cluster mode, cluster.partitions > 0) consumes
//     the partitions a cluster.Owner holds, one consumer per partition and
//     epoch, and hands all of them to one handler (see "Cluster mode").
//   - AppendForecast, AppendAlert and AppendReject encode the output
//     messages without reflection into a caller's buffer; Publisher
//     publishes them; ServeQueries answers forewarn query.
//
// # Delivery
//
// Durable mode (IntakeOptions.Durable; the config's default) keeps a JetStream stream over the intake
// subjects — file storage; retention by limits: messages older than MaxAge
// (default 7 days) or beyond MaxBytes (default 1 GiB) are discarded,
// oldest first, whether or not the daemon has read them — and one durable
// pull consumer with the acknowledge-all policy. The caller acknowledges
// sequence s with Intake.Ack once the effects of all messages ≤ s are
// committed; what is not acknowledged is delivered again after a restart,
// starting just past the acknowledgement floor, in stream order. So a
// message may be handed over twice across restarts (never within one Run):
// the caller records the last applied sequence per series and skips what
// it has already applied. With the embedded server, JetStream writes to
// disk at once but fsyncs only periodically (every 2 minutes by default):
// a process crash loses nothing acknowledged by the server, a machine
// crash may lose the last unsynced stretch unless EmbeddedOptions.SyncAlways
// is set.
//
// The stream stores what its publishers send; a publisher that needs
// every observation kept should publish with JetStream acknowledgements
// (and retry without one), because under overload the server drops core
// publications that the stream cannot take in — measured here: a single
// connection publishing 300 000 small messages as fast as it could got
// about half of them stored.
//
// Plain mode (IntakeOptions.Durable false) uses core subscriptions. It is best
// effort: messages published while the daemon is down or disconnected are
// lost, a handler that falls far behind makes the client drop messages
// (see Intake.Dropped), and nothing is redelivered. Seq is then 0.
//
// # Cluster mode
//
// With cluster.partitions: N > 0 the intake stream is created with the
// subject transform cluster.Transform(N) and intake.replicas copies, and
// an existing stream cut into another count is refused (cluster.CheckStream;
// a plain Intake checks too, so partitions: 0 refuses a partitioned
// stream). NewClusterIntake joins the lease bucket LeaseBucket(stream) as
// cluster.instance; PartitionedIntake.Run opens, for each partition the
// Owner reports gained, the consumer cluster.ConsumerName(intake.consumer,
// p, epoch) with cluster.OpenConsumer (which deletes older epochs: a paused
// former owner is fenced), and stops it when the partition is lost. The
// stored subject "p.metrics.x" is handed over as "metrics.x" (cluster.Split).
//
// In this step one handler (one daemon loop) serves every partition an
// instance owns; the partitions' batches reach it one at a time. Each
// partition keeps its own acknowledgement floor: Mark, called when the
// daemon's flush takes its floor, notes what each partition has handed
// over, and Ack(s) acknowledges min(s, mark) on each consumer.
//
// There are no snapshots yet: a new owner's consumer starts at the first
// message the stream still holds, so the owner rebuilds every series it has
// no record of from the stream's retained history (intake.max_age,
// intake.max_bytes), and a series it has a record of skips what the record
// already reflects. What the stream no longer holds is lost to the new
// owner. Only the owner answers forewarn.query.<topic> (OwnsTopic with
// ServeQueriesOwned); the others stay silent.
//
// # Concurrency
//
// Intake.Run calls its handler from one goroutine; Intake.Ack, Publisher
// and the Append functions may be used from any goroutine (the Append
// functions share nothing). ParsePayload is a pure function.
//
// # Encoding
//
// Output JSON has the keys of CONTRACT.md §2 in a fixed order and no white
// space. Times are RFC 3339 in UTC, with a fraction only when the time is
// not a whole second. The numbers in a forecast's points carry 12
// significant digits (never crossing the message's last_value, see
// AppendForecast); every other number is the shortest decimal that reads
// back as the same float64. JSON has no NaN or infinity, so a non-finite
// number, or a band bound outside the inverse transform's domain, is null.
// A forecast point's bands come in ascending order of level.
package stream
