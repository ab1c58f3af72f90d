package cluster

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Keys of the lease bucket.
const (
	memberPrefix = "member."
	leasePrefix  = "lease."
)

func memberKey(instance string) string { return memberPrefix + instance }
func leaseKey(p int) string            { return leasePrefix + strconv.Itoa(p) }

// EnsureBucket creates the lease bucket called name, or updates it, with
// replicas copies (intake.replicas), one revision per key, and per-key
// lifetimes on (the server removes a key whose lifetime ends and leaves a
// marker that watchers see; nats-server 2.11 and later). The markers are
// kept for lease. Errors wrap ErrBucket and say which right or server
// feature is missing.
func EnsureBucket(ctx context.Context, js jetstream.JetStream, name string, replicas int, lease time.Duration) (jetstream.KeyValue, error) {
	cfg := jetstream.KeyValueConfig{
		Bucket:         name,
		Description:    "forewarn cluster: live instances and partition leases",
		History:        1,
		Replicas:       replicas,
		Storage:        jetstream.FileStorage,
		LimitMarkerTTL: max(lease, time.Second),
	}
	kv, err := Ensure(ctx,
		func(ctx context.Context) (jetstream.KeyValue, error) { return js.CreateOrUpdateKeyValue(ctx, cfg) },
		func(ctx context.Context) (jetstream.KeyValue, error) { return js.KeyValue(ctx, name) },
		func(err error) (error, bool) { err = withDenied(js, err, name); return err, isPermission(err) })
	if err != nil {
		return nil, fmt.Errorf("%w %s: %w%s", ErrBucket, name, err, bucketHint(err, name))
	}
	return kv, nil
}

// bucketHint says what an instance needs for the bucket, when err looks
// like a missing right or a missing server feature.
func bucketHint(err error, bucket string) string {
	var api *jetstream.APIError
	switch {
	case isPermission(err):
		return fmt.Sprintf(" (each instance needs publish on $KV.%s.>, $JS.API.INFO and the JetStream API for stream KV_%s: $JS.API.STREAM.*.KV_%s, $JS.API.CONSUMER.*.KV_%s.>, $JS.API.DIRECT.GET.KV_%s.>; README, Rights)", bucket, bucket, bucket, bucket, bucket)
	case errors.Is(err, jetstream.ErrLimitMarkerTTLNotSupported):
		return " (per-key lifetimes need nats-server 2.11 or later)"
	case errors.As(err, &api) && api.ErrorCode == jetstream.JSErrCodeJetStreamNotEnabled:
		return " (JetStream is not enabled on the server)"
	}
	return ""
}

// withDenied adds to err the connection's last permissions violation
// when it concerns name (a bucket or store): the server refuses a
// publication asynchronously, so the request itself only times out.
func withDenied(js jetstream.JetStream, err error, name string) error {
	if err == nil || isPermission(err) {
		return err
	}
	le := js.Conn().LastError()
	if le != nil && errors.Is(le, nats.ErrPermissionViolation) && (strings.Contains(le.Error(), name) || strings.Contains(le.Error(), `"$JS.API.INFO"`)) {
		return fmt.Errorf("%w (%w)", err, le)
	}
	return err
}

// isPermission reports whether err is the server refusing a right.
func isPermission(err error) bool {
	return errors.Is(err, nats.ErrPermissionViolation) || strings.Contains(strings.ToLower(err.Error()), "permission")
}

// member is the value of a member key.
type member struct {
	Instance    string `json:"instance"`
	Incarnation string `json:"incarnation"` // new on each Start
}

// lease is the value of a lease key. Epoch is the revision at which the
// owner acquired the lease; 0 in the value it acquires it with (the
// revision is not known before the write), the acquiring revision in
// every renewal.
type lease struct {
	Instance    string `json:"instance"`
	Incarnation string `json:"incarnation"`
	Epoch       uint64 `json:"epoch,omitempty"`
}

// epochOf returns the epoch of a lease entry.
func (l lease) epochOf(rev uint64) uint64 {
	if l.Epoch != 0 {
		return l.Epoch
	}
	return rev
}

// casTTL writes value under key if the key's last revision is rev, with
// a lifetime of ttl, and returns the new revision. It is kv.Update plus a
// per-key lifetime (Update writes without one): the same expected-last-
// subject-sequence header on the bucket's subject. A mismatch wraps
// jetstream.ErrKeyRevisionMismatch.
func casTTL(ctx context.Context, js jetstream.JetStream, bucket, key string, value []byte, rev uint64, ttl time.Duration) (uint64, error) {
	m := &nats.Msg{Subject: "$KV." + bucket + "." + key, Data: value, Header: nats.Header{}}
	ack, err := js.PublishMsg(ctx, m, jetstream.WithExpectLastSequencePerSubject(rev), jetstream.WithMsgTTL(ttl))
	if err != nil {
		var api *jetstream.APIError
		if errors.As(err, &api) && (api.ErrorCode == jetstream.JSErrCodeStreamWrongLastSequence || api.ErrorCode == jetstream.JSErrCodeStreamWrongLastSequenceConstant) {
			return 0, fmt.Errorf("%w: %w", err, jetstream.ErrKeyRevisionMismatch)
		}
		return 0, err
	}
	return ack.Sequence, nil
}

func mustJSON(v any) []byte {
	b, err := json.Marshal(v)
	if err != nil {
		panic(err) // plain structs of strings and integers
	}
	return b
}
