package cluster

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"strconv"

	"github.com/nats-io/nats.go/jetstream"
)

// Snapshot is what the owner of a partition stores on the bus for the
// partition's next owner: the records of its series (state records,
// self-contained and versioned, each holding the stream position it
// reflects; this package does not read them) and the partition's
// acknowledged stream floor. Every message of the partition at or below
// Floor is reflected in Records; the next owner replays the partition
// from Floor+1, and the records' positions make the replay a no-op for
// what they already hold.
type Snapshot struct {
	Partition int
	Epoch     uint64 // the epoch of the owner that stored it
	Floor     uint64
	Records   [][]byte
}

// The snapshot encoding: magic, version, partition, epoch, floor, record
// count, each record as its length and bytes, and a CRC-32 (IEEE) of all
// that precedes it; integers big-endian.
var snapshotMagic = []byte("fwsnap")

const snapshotVersion = 1

// MarshalBinary encodes s.
func (s *Snapshot) MarshalBinary() ([]byte, error) {
	n := len(snapshotMagic) + 2 + 4 + 8 + 8 + 4 + 4
	for _, r := range s.Records {
		n += 4 + len(r)
	}
	b := make([]byte, 0, n)
	b = append(b, snapshotMagic...)
	b = binary.BigEndian.AppendUint16(b, snapshotVersion)
	b = binary.BigEndian.AppendUint32(b, uint32(s.Partition))
	b = binary.BigEndian.AppendUint64(b, s.Epoch)
	b = binary.BigEndian.AppendUint64(b, s.Floor)
	b = binary.BigEndian.AppendUint32(b, uint32(len(s.Records)))
	for _, r := range s.Records {
		b = binary.BigEndian.AppendUint32(b, uint32(len(r)))
		b = append(b, r...)
	}
	return binary.BigEndian.AppendUint32(b, crc32.ChecksumIEEE(b)), nil
}

// UnmarshalBinary decodes what MarshalBinary encoded. The records are
// copies: b may be reused.
func (s *Snapshot) UnmarshalBinary(b []byte) error {
	bad := func(what string) error { return fmt.Errorf("%w: %s", ErrSnapshot, what) }
	head := len(snapshotMagic) + 2 + 4 + 8 + 8 + 4
	if len(b) < head+4 || !bytes.Equal(b[:len(snapshotMagic)], snapshotMagic) {
		return bad("not a partition snapshot")
	}
	body, sum := b[:len(b)-4], binary.BigEndian.Uint32(b[len(b)-4:])
	if crc32.ChecksumIEEE(body) != sum {
		return bad("checksum mismatch (damaged)")
	}
	r := body[len(snapshotMagic):]
	if v := binary.BigEndian.Uint16(r); v != snapshotVersion {
		return bad(fmt.Sprintf("version %d; this build reads version %d", v, snapshotVersion))
	}
	out := Snapshot{
		Partition: int(binary.BigEndian.Uint32(r[2:])),
		Epoch:     binary.BigEndian.Uint64(r[6:]),
		Floor:     binary.BigEndian.Uint64(r[14:]),
	}
	count := binary.BigEndian.Uint32(r[22:])
	r = r[26:]
	for i := range count {
		if len(r) < 4 {
			return bad(fmt.Sprintf("record %d cut short", i))
		}
		n := binary.BigEndian.Uint32(r)
		if uint64(len(r)-4) < uint64(n) {
			return bad(fmt.Sprintf("record %d cut short", i))
		}
		out.Records = append(out.Records, bytes.Clone(r[4:4+n]))
		r = r[4+n:]
	}
	if len(r) != 0 {
		return bad(fmt.Sprintf("%d bytes after the last record", len(r)))
	}
	*s = out
	return nil
}

// snapshotName is the object name of partition p's snapshot.
func snapshotName(p int) string { return "p" + strconv.Itoa(p) }

// EnsureSnapshotStore creates the object store called name, or updates
// it, with replicas copies (intake.replicas). Errors wrap ErrSnapshot and
// say which right or server feature is missing.
func EnsureSnapshotStore(ctx context.Context, js jetstream.JetStream, name string, replicas int) (*SnapshotStore, error) {
	cfg := jetstream.ObjectStoreConfig{
		Bucket:      name,
		Description: "forewarn cluster: partition snapshots for handover",
		Replicas:    replicas,
		Storage:     jetstream.FileStorage,
	}
	obs, err := Ensure(ctx,
		func(ctx context.Context) (jetstream.ObjectStore, error) {
			return js.CreateOrUpdateObjectStore(ctx, cfg)
		},
		func(ctx context.Context) (jetstream.ObjectStore, error) { return js.ObjectStore(ctx, name) },
		func(err error) (error, bool) { err = withDenied(js, err, name); return err, isPermission(err) })
	if err != nil {
		return nil, fmt.Errorf("%w %s: %w%s", ErrSnapshot, name, err, snapshotHint(err, name))
	}
	return &SnapshotStore{js: js, obs: obs, name: name}, nil
}

// SnapshotStore is the object store of the partition snapshots (one
// object per partition). Safe for concurrent use.
type SnapshotStore struct {
	js   jetstream.JetStream
	obs  jetstream.ObjectStore
	name string
}

// Name returns the object store's name.
func (st *SnapshotStore) Name() string { return st.name }

// snapshotHint says what an instance needs for the snapshot store, when
// err looks like a missing right.
func snapshotHint(err error, name string) string {
	if h := bucketHint(err, name); h == "" {
		return ""
	}
	if isPermission(err) {
		return fmt.Sprintf(" (each instance needs publish on $O.%s.>, $JS.API.INFO and the JetStream API for stream OBJ_%s: $JS.API.STREAM.*.OBJ_%s, $JS.API.CONSUMER.*.OBJ_%s.>, $JS.API.DIRECT.GET.OBJ_%s.>; README, Rights)", name, name, name, name, name)
	}
	return bucketHint(err, name)
}

// Put stores s as its partition's snapshot, unless the store
// already holds one of a later epoch (then the error wraps ErrFenced: a
// newer owner has stored its own, and this one must not replace it).
func (st *SnapshotStore) Put(ctx context.Context, s *Snapshot) error {
	cur, err := st.Get(ctx, s.Partition)
	switch {
	case err != nil && !errors.Is(err, ErrSnapshot):
		return err
	case err == nil && cur != nil && cur.Epoch > s.Epoch:
		return fmt.Errorf("%w: partition %d has a snapshot of epoch %d, later than %d", ErrFenced, s.Partition, cur.Epoch, s.Epoch)
	}
	b, err := s.MarshalBinary()
	if err != nil {
		return err
	}
	if _, err := st.obs.PutBytes(ctx, snapshotName(s.Partition), b); err != nil {
		err = withDenied(st.js, err, st.name)
		return fmt.Errorf("%w %s: store partition %d: %w%s", ErrSnapshot, st.name, s.Partition, err, snapshotHint(err, st.name))
	}
	return nil
}

// Get returns partition p's latest snapshot, nil (and no error)
// when none was stored. A snapshot that cannot be read gives an error
// wrapping ErrSnapshot.
func (st *SnapshotStore) Get(ctx context.Context, p int) (*Snapshot, error) {
	b, err := st.obs.GetBytes(ctx, snapshotName(p))
	if errors.Is(err, jetstream.ErrObjectNotFound) {
		return nil, nil
	}
	if err != nil {
		err = withDenied(st.js, err, st.name)
		return nil, fmt.Errorf("cluster: read the snapshot of partition %d from %s: %w%s", p, st.name, err, snapshotHint(err, st.name))
	}
	var s Snapshot
	if err := s.UnmarshalBinary(b); err != nil {
		return nil, fmt.Errorf("partition %d: %w", p, err)
	}
	if s.Partition != p {
		return nil, fmt.Errorf("%w: the snapshot stored for partition %d names partition %d", ErrSnapshot, p, s.Partition)
	}
	return &s, nil
}

// Probe writes, reads back and deletes an object named after instance:
// an error (wrapping ErrSnapshot, naming the store and the right) says
// this instance cannot use the store.
func (st *SnapshotStore) Probe(ctx context.Context, instance string) error {
	name := "probe-" + instance
	fail := func(op string, err error) error {
		err = withDenied(st.js, err, st.name)
		return fmt.Errorf("%w %s: %s: %w%s", ErrSnapshot, st.name, op, err, snapshotHint(err, st.name))
	}
	// each step is retried while the store's stream answers nobody (just
	// created or its leader moving: Settle)
	if err := Settle(ctx, func(ctx context.Context) error {
		_, err := st.obs.PutBytes(ctx, name, []byte(instance))
		return err
	}); err != nil {
		return fail("write", err)
	}
	// A read may be served by a replica that has not yet stored the
	// write: "not found" is an answer, and so proves the right.
	if err := Settle(ctx, func(ctx context.Context) error {
		_, err := st.obs.GetBytes(ctx, name)
		return err
	}); err != nil && !errors.Is(err, jetstream.ErrObjectNotFound) {
		return fail("read", err)
	}
	if err := Settle(ctx, func(ctx context.Context) error { return st.obs.Delete(ctx, name) }); err != nil && !errors.Is(err, jetstream.ErrObjectNotFound) {
		return fail("delete", err)
	}
	return nil
}
