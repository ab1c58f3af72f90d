package cluster

import (
	"bytes"
	"errors"
	"fmt"
	"testing"
)

// A snapshot survives its encoding byte for byte, and any damage to the
// encoding (a flipped byte anywhere, a cut) is refused rather than read as
// other records. Common practice: a checksummed, versioned container.
func TestSnapshotEncoding(t *testing.T) {
	s := &Snapshot{Partition: 7, Epoch: 1234567, Floor: 987654321,
		Records: [][]byte{[]byte("first record"), {}, bytes.Repeat([]byte{0xfe}, 1000)}}
	b, err := s.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var got Snapshot
	if err := got.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if got.Partition != s.Partition || got.Epoch != s.Epoch || got.Floor != s.Floor || len(got.Records) != len(s.Records) {
		t.Fatalf("decoded %+v, want %+v", got, s)
	}
	for i := range s.Records {
		if !bytes.Equal(got.Records[i], s.Records[i]) {
			t.Errorf("record %d: got %q, want %q", i, got.Records[i], s.Records[i])
		}
	}
	for i := range b {
		d := bytes.Clone(b)
		d[i] ^= 0x40
		if err := new(Snapshot).UnmarshalBinary(d); !errors.Is(err, ErrSnapshot) {
			t.Fatalf("byte %d flipped: err %v, want ErrSnapshot", i, err)
		}
	}
	for _, n := range []int{0, 5, len(b) / 2, len(b) - 1} {
		if err := new(Snapshot).UnmarshalBinary(b[:n]); !errors.Is(err, ErrSnapshot) {
			t.Errorf("cut at %d: err %v, want ErrSnapshot", n, err)
		}
	}
}

// The store keeps one snapshot per partition, the latest, and refuses to
// replace one of a later epoch (a fenced former owner's late snapshot);
// Probe writes, reads and deletes (an instance's rights, checked at start).
func TestSnapshotStore(t *testing.T) {
	_, js := connect(t, 0, "snapshots")
	ctx := ctxT(t)
	name := fmt.Sprintf("SNAPTEST_%d", len(t.Name()))
	st, err := EnsureSnapshotStore(ctx, js, name, 3)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = js.DeleteObjectStore(ctx, name) })
	if s, err := st.Get(ctx, 3); err != nil || s != nil {
		t.Fatalf("empty store: got %v, %v; want none", s, err)
	}
	if err := st.Probe(ctx, "fw-x"); err != nil {
		t.Fatal(err)
	}
	put := func(epoch, floor uint64) error {
		return st.Put(ctx, &Snapshot{Partition: 3, Epoch: epoch, Floor: floor, Records: [][]byte{fmt.Appendf(nil, "r%d", floor)}})
	}
	for _, c := range []struct{ epoch, floor uint64 }{{10, 100}, {10, 150}, {20, 160}} {
		if err := put(c.epoch, c.floor); err != nil {
			t.Fatal(err)
		}
	}
	if err := put(10, 170); !errors.Is(err, ErrFenced) {
		t.Errorf("a snapshot of epoch 10 over one of epoch 20: err %v, want ErrFenced", err)
	}
	s, err := st.Get(ctx, 3)
	if err != nil {
		t.Fatal(err)
	}
	if s.Epoch != 20 || s.Floor != 160 || string(s.Records[0]) != "r160" {
		t.Errorf("latest snapshot: epoch %d floor %d records %q, want epoch 20 floor 160 [r160]", s.Epoch, s.Floor, s.Records)
	}
}
