package daemon

import (
	"context"

	"forewarn/stream"
)

// Intake is what the daemon needs of a source of messages: all of it. A
// stream.Intake (durable consumer or plain subscription) is one; a
// partition's consumer, owned for one lease epoch, is meant to be another.
//
// The daemon calls Run once, on a goroutine of its own, and Subscribed and
// Ack from its loop goroutine.
type Intake interface {
	// Run delivers batches of messages, in stream order, to handle until
	// ctx ends or the source fails. handle returns once the batch is
	// applied; the messages are not used after it returns.
	Run(ctx context.Context, handle func(batch []stream.Message)) error
	// Subscribed is closed once the source is on the server, so that
	// nothing published afterwards is missed.
	Subscribed() <-chan struct{}
	// Ack acknowledges every message up to and including seq (the
	// stream position): their effect is on disk.
	Ack(seq uint64) error
}

// Marker is implemented by an Intake whose messages come from several
// consumers with interleaved stream positions (stream.PartitionedIntake,
// one consumer per partition). The flusher calls Mark on the loop when a
// flush takes its floor; the Ack that follows that flush's commit then
// reaches, on each consumer, only what was handed over before the Mark.
// For such an intake the flusher acknowledges after every flush, even at
// a floor it acknowledged before, since a consumer behind the others
// advances below it.
type Marker interface {
	Mark()
}

// PartMarker is implemented by a Marker intake whose consumers are
// partitions (stream.PartitionedIntake): with several loops each loop
// marks and acknowledges only the partitions it owns (sel), when its own
// flush takes its floor and once its own records are written.
type PartMarker interface {
	MarkWhere(sel func(p int) bool)
	AckWhere(seq uint64, sel func(p int) bool) error
}

var (
	_ Intake     = (*stream.Intake)(nil)
	_ PartMarker = (*stream.PartitionedIntake)(nil)
	_ Intake     = (*stream.PartitionedIntake)(nil)
	_ Marker     = (*stream.PartitionedIntake)(nil)
)
