package cluster

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go/jetstream"
)

// ConsumerName returns the durable consumer name of partition p at epoch
// (the revision of the lease that made its owner): prefix-p<p>-e<epoch>.
func ConsumerName(prefix string, p int, epoch uint64) string {
	return prefix + "-p" + strconv.Itoa(p) + "-e" + strconv.FormatUint(epoch, 10)
}

// parseConsumerName is the inverse of ConsumerName; ok is false for names
// of other consumers.
func parseConsumerName(prefix, name string) (p int, epoch uint64, ok bool) {
	rest, found := strings.CutPrefix(name, prefix+"-p")
	if !found {
		return 0, 0, false
	}
	ps, es, found := strings.Cut(rest, "-e")
	if !found {
		return 0, 0, false
	}
	p, err1 := strconv.Atoi(ps)
	epoch, err2 := strconv.ParseUint(es, 10, 64)
	if err1 != nil || err2 != nil || ps != strconv.Itoa(p) || es != strconv.FormatUint(epoch, 10) {
		return 0, 0, false
	}
	return p, epoch, true
}

// Fence deletes the consumers of partition p whose epoch is older than
// epoch, so that a former owner that was paused past its lease can take
// nothing more from the partition nor acknowledge anything: its next pull
// or acknowledgement finds no consumer. It returns the names it deleted.
// If a consumer of a later epoch exists, the caller is itself a former
// owner: Fence deletes nothing and returns an error wrapping ErrFenced.
func Fence(ctx context.Context, st jetstream.Stream, prefix string, p int, epoch uint64) ([]string, error) {
	names := st.ConsumerNames(ctx)
	var older []string
	var newer string
	for name := range names.Name() {
		q, e, ok := parseConsumerName(prefix, name)
		if !ok || q != p {
			continue
		}
		switch {
		case e < epoch:
			older = append(older, name)
		case e > epoch:
			newer = name
		}
	}
	if err := names.Err(); err != nil {
		return nil, fmt.Errorf("cluster: list consumers of partition %d: %w", p, err)
	}
	if newer != "" {
		return nil, fmt.Errorf("%w: partition %d has consumer %s, later than epoch %d", ErrFenced, p, newer, epoch)
	}
	var deleted []string
	for _, name := range older {
		err := st.DeleteConsumer(ctx, name)
		if err != nil && !errors.Is(err, jetstream.ErrConsumerNotFound) {
			return deleted, fmt.Errorf("cluster: fence partition %d: delete consumer %s: %w", p, name, err)
		}
		deleted = append(deleted, name)
	}
	return deleted, nil
}

// ConsumerOptions are the settings of a partition consumer that
// OpenConsumer does not derive from the partition.
type ConsumerOptions struct {
	// StartSeq is the first stream sequence to deliver (the snapshot's
	// floor + 1). Zero: from the start of the stream.
	StartSeq uint64
	// AckWait, MaxAckPending and Replicas as in jetstream.ConsumerConfig.
	// Zero: the server's defaults, and the stream's replicas.
	AckWait       time.Duration
	MaxAckPending int
	Replicas      int
}

// OpenConsumer creates the durable pull consumer of partition p for the
// owner at epoch (acknowledge-all, in stream order, filter
// FilterSubject(p)), then fences the older epochs with Fence. It creates
// before it fences: two owners that both create, then both list, each see
// the other's consumer, so at most one of them keeps one (the one of the
// later epoch). When a later epoch exists the consumer just made is
// deleted again and the error wraps ErrFenced.
func OpenConsumer(ctx context.Context, st jetstream.Stream, prefix string, p int, epoch uint64, o ConsumerOptions) (jetstream.Consumer, error) {
	name := ConsumerName(prefix, p, epoch)
	cfg := jetstream.ConsumerConfig{
		Durable:       name,
		Description:   fmt.Sprintf("forewarn partition %d, owner epoch %d", p, epoch),
		FilterSubject: FilterSubject(p),
		AckPolicy:     jetstream.AckAllPolicy,
		DeliverPolicy: jetstream.DeliverAllPolicy,
		AckWait:       o.AckWait,
		MaxAckPending: o.MaxAckPending,
		Replicas:      o.Replicas,
	}
	if o.StartSeq > 0 {
		cfg.DeliverPolicy = jetstream.DeliverByStartSequencePolicy
		cfg.OptStartSeq = o.StartSeq
	}
	cons, err := st.CreateOrUpdateConsumer(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("cluster: create consumer %s: %w", name, err)
	}
	if _, err := Fence(ctx, st, prefix, p, epoch); err != nil {
		if errors.Is(err, ErrFenced) {
			_ = st.DeleteConsumer(ctx, name)
		}
		return nil, err
	}
	return cons, nil
}
