package cluster

import (
	"context"
	"errors"
	"fmt"
	"regexp"
	"strconv"
	"strings"

	"github.com/nats-io/nats.go/jetstream"
)

// MaxPartitions is the largest partition count (config.MaxPartitions).
const MaxPartitions = 4096

// Partition returns the partition of an intake subject among n, the same
// number the server writes into the stored subject with the stream's
// subject transform (Transform):
//
//	partition(subject) = FNV-1a₃₂(subject) mod n
//
// where the hash runs over the whole subject as published, tokens joined
// by dots. This is nats-server's partition(n) mapping function without
// token arguments (getHashPartition and TransformTokenizedSubject in
// server/subject_transform.go, v2.12 and later; the mapping is described
// in the NATS ADR-30 "Subject Transform"). FNV-1a: Fowler, Noll & Vo,
// IETF draft-eastlake-fnv. n ≤ 0 gives 0, as the server does for n = 0.
func Partition(subject string, n int) int {
	if n <= 0 {
		return 0
	}
	const (
		offset32 = 2166136261
		prime32  = 16777619
	)
	h := uint32(offset32)
	for i := 0; i < len(subject); i++ {
		h ^= uint32(subject[i])
		h *= prime32
	}
	return int(h % uint32(n))
}

// Transform returns the intake stream's subject transform for n
// partitions: every subject the stream takes in is stored with its
// partition number put in front ("metrics.shop.orders" is stored as
// "5.metrics.shop.orders" when it falls in partition 5).
func Transform(n int) *jetstream.SubjectTransformConfig {
	return &jetstream.SubjectTransformConfig{Source: ">", Destination: fmt.Sprintf("{{partition(%d)}}.>", n)}
}

// FilterSubject returns the consumer filter that selects partition p of
// the stored subjects.
func FilterSubject(p int) string { return strconv.Itoa(p) + ".>" }

// Split returns the partition and the subject as published of a stored
// subject, or ok false if it carries no partition token.
func Split(stored string) (p int, subject string, ok bool) {
	tok, rest, found := strings.Cut(stored, ".")
	if !found || rest == "" {
		return 0, "", false
	}
	p, err := strconv.Atoi(tok)
	if err != nil || p < 0 || tok != strconv.Itoa(p) {
		return 0, "", false
	}
	return p, rest, true
}

var transformRE = regexp.MustCompile(`^\{\{\s*[pP]artition\s*\(\s*(\d+)\s*\)\s*\}\}\.>$`)

// StreamPartitions returns the partition count a stream configuration
// cuts its subjects into: 0 without a subject transform, n for
// Transform(n), or an error wrapping ErrPartitions for a transform
// forewarn did not write.
func StreamPartitions(cfg jetstream.StreamConfig) (int, error) {
	t := cfg.SubjectTransform
	if t == nil || t.Destination == "" {
		return 0, nil
	}
	m := transformRE.FindStringSubmatch(t.Destination)
	if m == nil || (t.Source != ">" && t.Source != "") {
		return 0, fmt.Errorf("%w: stream %s has a subject transform %q → %q that is not forewarn's partitioning", ErrPartitions, cfg.Name, t.Source, t.Destination)
	}
	n, err := strconv.Atoi(m[1])
	if err != nil || n < 1 {
		return 0, fmt.Errorf("%w: stream %s has a partition count %q", ErrPartitions, cfg.Name, m[1])
	}
	return n, nil
}

// CheckStream reports whether the intake stream called name may be
// consumed with n partitions (cluster.partitions). A stream that does not
// exist yet passes (it will be created with Transform(n)). A stream cut
// into another count, or not cut when n > 0, or cut when n = 0, is an
// error wrapping ErrPartitions that says what to do: the stored subjects
// carry the count they were written with, so changing it would put one
// series in two partitions.
func CheckStream(ctx context.Context, js jetstream.JetStream, name string, n int) error {
	if n < 0 || n > MaxPartitions {
		return fmt.Errorf("%w: %d is outside 0..%d", ErrPartitions, n, MaxPartitions)
	}
	st, err := js.Stream(ctx, name)
	if errors.Is(err, jetstream.ErrStreamNotFound) {
		return nil
	}
	if err != nil {
		return fmt.Errorf("cluster: read stream %s: %w", name, err)
	}
	got, err := StreamPartitions(st.CachedInfo().Config)
	if err != nil {
		return err
	}
	switch {
	case got == n:
		return nil
	case got == 0:
		return fmt.Errorf("%w: cluster.partitions is %d but stream %s holds messages without partitions; "+
			"let the instances drain it, then delete the stream (or set cluster.partitions: 0)", ErrPartitions, n, name)
	case n == 0:
		return fmt.Errorf("%w: cluster.partitions is 0 but stream %s is cut into %d partitions; "+
			"set cluster.partitions: %d, or drain and delete the stream", ErrPartitions, name, got, got)
	default:
		return fmt.Errorf("%w: cluster.partitions is %d but stream %s is cut into %d partitions; "+
			"the count cannot change on a stream that holds messages: set cluster.partitions: %d, or drain and delete the stream",
			ErrPartitions, n, name, got, got)
	}
}
