package cluster

import (
	"context"
	"errors"
	"math/rand/v2"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// ensureAttempt bounds one request of Ensure, and ensureAttempts their
// number.
const (
	ensureAttempt  = 3 * time.Second
	ensureAttempts = 4
)

// settleAttempts bounds Settle: with its pauses of 200–700 ms about 4 s of
// waiting in all, the time a fresh replicated stream takes to elect its
// leader on a loopback cluster (common practice for this bound; the
// election timeouts of the server's Raft layer are a few seconds).
const settleAttempts = 10

// Ensure runs create (create a JetStream resource, or update it to the
// wanted settings), each attempt bounded by ensureAttempt, for instances
// that start at one moment. Several of them creating one resource at once
// may all go unanswered (seen with three instances creating the lease
// bucket on a fresh three-node cluster: every request timed out). So after
// a failed attempt Ensure looks the resource up (lookup): when it is
// there, one more create applies the wanted settings (the others are done
// by then), and the resource is returned as found if even that fails.
// Otherwise it waits a random 100–500 ms, so that the next attempts do
// not meet again, and tries again, up to ensureAttempts. stop reports an
// error not worth another attempt (a missing right); its result is the
// error returned.
func Ensure[T any](ctx context.Context, create, lookup func(context.Context) (T, error), stop func(error) (error, bool)) (T, error) {
	var zero T
	var err error
	for attempt := 1; ; attempt++ {
		actx, cancel := context.WithTimeout(ctx, ensureAttempt)
		v, cerr := create(actx)
		cancel()
		if cerr == nil {
			return v, nil
		}
		var final bool
		if err, final = stop(cerr); final || ctx.Err() != nil || attempt == ensureAttempts {
			return zero, err
		}
		lctx, cancel := context.WithTimeout(ctx, ensureAttempt)
		found, lerr := lookup(lctx)
		cancel()
		if lerr == nil {
			actx, cancel := context.WithTimeout(ctx, ensureAttempt)
			v, cerr := create(actx)
			cancel()
			if cerr == nil {
				return v, nil
			}
			return found, nil
		}
		select {
		case <-ctx.Done():
			return zero, err
		case <-time.After(time.Duration(100+rand.IntN(400)) * time.Millisecond):
		}
	}
}

// Settle runs op, each attempt bounded by ensureAttempt, until it fails
// with something other than "no responders", up to settleAttempts
// attempts with a random 200–700 ms pause between them. A stream that
// was just created, or whose leader just moved, answers nobody for a
// moment (its request subject has no responder until a leader is
// elected); an instance that starts then must not give up on it. Any
// other result ends it at once.
func Settle(ctx context.Context, op func(context.Context) error) error {
	for attempt := 1; ; attempt++ {
		actx, cancel := context.WithTimeout(ctx, ensureAttempt)
		err := op(actx)
		cancel()
		if !NoResponders(err) || ctx.Err() != nil || attempt == settleAttempts {
			return err
		}
		select {
		case <-ctx.Done():
			return err
		case <-time.After(time.Duration(200+rand.IntN(500)) * time.Millisecond):
		}
	}
}

// NoResponders reports whether err says a request found nobody to answer
// it (core NATS) or a publication no stream to store it (JetStream).
func NoResponders(err error) bool {
	return errors.Is(err, nats.ErrNoResponders) || errors.Is(err, jetstream.ErrNoStreamResponse)
}
