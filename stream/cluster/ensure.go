package cluster

import (
	"context"
	"math/rand/v2"
	"time"
)

// ensureAttempt bounds one request of Ensure, and ensureAttempts their
// number.
const (
	ensureAttempt  = 3 * time.Second
	ensureAttempts = 4
)

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
