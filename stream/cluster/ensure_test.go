package cluster

import (
	"context"
	"errors"
	"fmt"
	"testing"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Settle retries an operation while it finds no responder (a stream just
// created or between leaders answers nobody; seen as "nats: no responders
// available for request" from an instance probing a fresh three-node
// cluster's snapshot store), and returns any other result at once.
func TestSettle(t *testing.T) {
	ctx := context.Background()
	calls := 0
	err := Settle(ctx, func(context.Context) error {
		calls++
		if calls < 3 {
			return fmt.Errorf("write: %w", nats.ErrNoResponders)
		}
		return nil
	})
	if err != nil || calls != 3 {
		t.Errorf("no responders twice, then success: err %v after %d calls, want nil after 3", err, calls)
	}

	calls = 0
	other := errors.New("permissions violation")
	if err := Settle(ctx, func(context.Context) error { calls++; return other }); !errors.Is(err, other) || calls != 1 {
		t.Errorf("another error: %v after %d calls, want it after 1", err, calls)
	}

	calls = 0
	err = Settle(ctx, func(context.Context) error { calls++; return jetstream.ErrNoStreamResponse })
	if !NoResponders(err) || calls != settleAttempts {
		t.Errorf("never a responder: %v after %d calls, want no responders after %d", err, calls, settleAttempts)
	}
}
