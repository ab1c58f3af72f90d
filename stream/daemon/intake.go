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

var _ Intake = (*stream.Intake)(nil)
