package state

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"forewarn/engine/series"
)

func TestStoreSaveLoadReopen(t *testing.T) {
	dir := t.TempDir()
	r := rand.New(rand.NewPCG(21, 22))
	batch := make([]*series.Snapshot, 50)
	for i := range batch {
		batch[i] = randomSnapshot(r, 200)
		batch[i].Topic = "host" + strings.Repeat("x", i) // distinct topics
	}
	s, err := Open(dir, NoSync())
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Save(batch); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}

	s = openTestIn(t, dir, ReadOnly())
	for _, want := range batch {
		got, err := s.Load(want.Topic)
		if err != nil {
			t.Fatalf("Load(%q): %v", want.Topic, err)
		}
		if d := diff(want, got); d != "" {
			t.Fatalf("Load(%q) differs at %s", want.Topic, d)
		}
	}
	if _, err := s.Load("absent"); !errors.Is(err, ErrNotFound) {
		t.Fatalf("Load(absent): %v, want ErrNotFound", err)
	}
	info, err := s.Info()
	if err != nil {
		t.Fatal(err)
	}
	if info.Series != len(batch) || info.Format != StoreVersion || info.Bytes <= 0 ||
		time.Since(info.Created) > time.Hour || info.Path != filepath.Join(dir, FileName) {
		t.Fatalf("Info = %+v", info)
	}
	if err := s.Check(); err != nil {
		t.Fatalf("Check: %v", err)
	}
	if err := s.Save(batch[:1]); !errors.Is(err, bolt.ErrDatabaseReadOnly) {
		t.Fatalf("Save on a read-only store: %v, want bbolt's read-only error", err)
	}
}

func TestStoreOverwriteAndDelete(t *testing.T) {
	s := openTest(t, NoSync())
	a := &series.Snapshot{Topic: "a", Seq: 1}
	if err := s.Save([]*series.Snapshot{a, {Topic: "b"}, {Topic: "a", Seq: 3}}); err != nil {
		t.Fatal(err)
	}
	if got, err := s.Load("a"); err != nil || got.Seq != 3 {
		t.Fatalf("Load(a) = %+v, %v; want the later entry (Seq 3)", got, err)
	}
	a.Seq = 9
	if err := s.Save([]*series.Snapshot{a}); err != nil {
		t.Fatal(err)
	}
	if got, err := s.Load("a"); err != nil || got.Seq != 9 {
		t.Fatalf("after overwrite Load(a) = %+v, %v", got, err)
	}
	if err := s.Delete("a"); err != nil {
		t.Fatal(err)
	}
	if err := s.Delete("a"); err != nil {
		t.Fatalf("second Delete: %v", err)
	}
	if _, err := s.Load("a"); !errors.Is(err, ErrNotFound) {
		t.Fatalf("Load after Delete: %v", err)
	}
	if _, err := s.Load("b"); err != nil {
		t.Fatalf("Load(b): %v", err)
	}
}

func TestStoreSaveRejectsBadBatch(t *testing.T) {
	s := openTest(t, NoSync())
	for name, batch := range map[string][]*series.Snapshot{
		"nil entry":   {{Topic: "ok"}, nil},
		"empty topic": {{Topic: "ok"}, {}},
		"long topic":  {{Topic: strings.Repeat("t", bolt.MaxKeySize+1)}},
	} {
		err := s.Save(batch)
		if !errors.Is(err, ErrInvalid) && !errors.Is(err, ErrTooLarge) {
			t.Errorf("%s: Save = %v", name, err)
		}
	}
	// Nothing of a refused batch is written.
	if _, err := s.Load("ok"); !errors.Is(err, ErrNotFound) {
		t.Fatalf("a refused batch left a record: %v", err)
	}
	if err := s.Delete(""); !errors.Is(err, ErrInvalid) {
		t.Fatalf("Delete(\"\") = %v", err)
	}
}

func TestOpenLocked(t *testing.T) {
	dir := t.TempDir()
	openTestIn(t, dir, NoSync())
	for _, opts := range [][]Option{{LockTimeout(50 * time.Millisecond)}, {ReadOnly(), LockTimeout(50 * time.Millisecond)}} {
		s, err := Open(dir, opts...)
		if err == nil {
			s.Close()
			t.Fatal("second Open while the first is open succeeded")
		}
		var le *LockedError
		if !errors.Is(err, ErrLocked) || !errors.As(err, &le) {
			t.Fatalf("second Open: %v, want ErrLocked", err)
		}
		want := filepath.Join(dir, FileName) + " is held by another process (is a daemon running?)"
		if !strings.Contains(err.Error(), want) {
			t.Fatalf("message %q does not say %q", err, want)
		}
	}
}

func TestFileModes(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "new", "data")
	openTestIn(t, dir, NoSync())
	for path, want := range map[string]os.FileMode{dir: 0o700, filepath.Join(dir, FileName): 0o600} {
		fi, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		// The umask can only narrow these further.
		if got := fi.Mode().Perm(); got&^want != 0 {
			t.Errorf("%s: mode %v, want at most %v", path, got, want)
		}
	}
}

func TestOpenNarrowsWideFile(t *testing.T) {
	dir := t.TempDir()
	s, err := Open(dir, NoSync())
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	path := filepath.Join(dir, FileName)
	if err := os.Chmod(path, 0o644); err != nil {
		t.Fatal(err)
	}
	openTestIn(t, dir, NoSync())
	if fi, _ := os.Stat(path); fi.Mode().Perm() != 0o600 {
		t.Fatalf("mode after reopen %v, want 0600", fi.Mode().Perm())
	}
}

func TestOpenReadOnlyMissing(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "none")
	if _, err := Open(dir, ReadOnly()); !errors.Is(err, ErrNoState) {
		t.Fatalf("read-only Open of a missing file: %v, want ErrNoState", err)
	}
	if _, err := os.Stat(dir); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("read-only Open created %s", dir)
	}
}

func TestOpenForeignFile(t *testing.T) {
	dir := t.TempDir()
	db, err := bolt.Open(filepath.Join(dir, FileName), 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Update(func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("other")); return err }); err != nil {
		t.Fatal(err)
	}
	db.Close()
	for _, opts := range [][]Option{nil, {ReadOnly()}} {
		if _, err := Open(dir, opts...); !errors.Is(err, ErrNotState) {
			t.Fatalf("Open of a foreign bbolt file: %v, want ErrNotState", err)
		}
	}
}

func TestOpenNewerStoreVersion(t *testing.T) {
	dir := t.TempDir()
	s, err := Open(dir, NoSync())
	if err != nil {
		t.Fatal(err)
	}
	if err := s.db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketMeta).Put(keyFormat, le.AppendUint16(nil, StoreVersion+1))
	}); err != nil {
		t.Fatal(err)
	}
	s.Close()
	_, err = Open(dir)
	var ve *VersionError
	if !errors.As(err, &ve) || ve.Found != StoreVersion+1 || !strings.HasPrefix(ve.What, "store ") {
		t.Fatalf("Open of a newer store: %v, want a store *VersionError", err)
	}
}

// putRaw stores raw bytes under a key, bypassing Encode.
func putRaw(t *testing.T, s *Store, key string, v []byte) {
	t.Helper()
	if err := s.db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketSeries).Put([]byte(key), v) }); err != nil {
		t.Fatal(err)
	}
}

func TestLoadAllSurvivesBadRecords(t *testing.T) {
	s := openTest(t, NoSync())
	good := []*series.Snapshot{{Topic: "a", Seq: 1}, {Topic: "c", Seq: 3}, {Topic: "e", Seq: 5}}
	if err := s.Save(good); err != nil {
		t.Fatal(err)
	}
	damaged := Encode(nil, &series.Snapshot{Topic: "b"})
	damaged[len(damaged)/2] ^= 0x10
	putRaw(t, s, "b", damaged)
	putRaw(t, s, "d", Encode(nil, &series.Snapshot{Topic: "not-d"})) // record under the wrong key
	newer := Encode(nil, &series.Snapshot{Topic: "f"})
	le.PutUint16(newer[4:], FormatVersion+1)
	putRaw(t, s, "f", reseal(newer))

	seen := map[string]error{}
	loaded := map[string]uint64{}
	err := s.LoadAll(func(topic string, snap *series.Snapshot, err error) error {
		seen[topic] = err
		if err == nil {
			loaded[topic] = snap.Seq
		} else if snap != nil {
			t.Errorf("%s: snapshot with an error", topic)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(seen) != 6 {
		t.Fatalf("LoadAll visited %d topics, want 6: %v", len(seen), seen)
	}
	for _, g := range good {
		if loaded[g.Topic] != g.Seq {
			t.Errorf("%s: loaded %v, want Seq %d (err %v)", g.Topic, loaded[g.Topic], g.Seq, seen[g.Topic])
		}
	}
	for topic, want := range map[string]error{"b": ErrCorrupt, "d": ErrCorrupt, "f": ErrVersion} {
		if !errors.Is(seen[topic], want) || !strings.Contains(seen[topic].Error(), `"`+topic+`"`) {
			t.Errorf("%s: error %v, want %v naming the topic", topic, seen[topic], want)
		}
	}
	if _, err := s.Load("b"); !errors.Is(err, ErrCorrupt) {
		t.Errorf("Load(b) = %v, want ErrCorrupt", err)
	}

	// Check lists every bad record, one per line.
	err = s.Check()
	if err == nil {
		t.Fatal("Check found nothing")
	}
	if n := len(err.(interface{ Unwrap() []error }).Unwrap()); n != 3 {
		t.Fatalf("Check reported %d problems, want 3:\n%v", n, err)
	}

	// The caller can reset the bad series from inside fn; an error from fn stops the walk.
	stop := errors.New("stop")
	calls := 0
	err = s.LoadAll(func(topic string, _ *series.Snapshot, err error) error {
		calls++
		if err != nil {
			if derr := s.Delete(topic); derr != nil {
				t.Fatal(derr)
			}
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || calls != 2 {
		t.Fatalf("LoadAll returned %v after %d calls, want stop after 2", err, calls)
	}
	if _, err := s.Load("b"); !errors.Is(err, ErrNotFound) {
		t.Fatalf("b not deleted: %v", err)
	}
}

func TestCloseIdempotent(t *testing.T) {
	s, err := Open(t.TempDir(), NoSync())
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
	if _, err := s.Load("x"); !errors.Is(err, ErrClosed) {
		t.Fatalf("Load after Close: %v, want ErrClosed", err)
	}
	if err := s.Save([]*series.Snapshot{{Topic: "x"}}); !errors.Is(err, ErrClosed) {
		t.Fatalf("Save after Close: %v, want ErrClosed", err)
	}
}

// Concurrent saves and loads (run with -race).
func TestStoreConcurrent(t *testing.T) {
	s := openTest(t, NoSync())
	var wg sync.WaitGroup
	for w := range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			r := rand.New(rand.NewPCG(uint64(w), 99))
			for i := range 20 {
				snap := randomSnapshot(r, 50)
				snap.Topic = string(rune('a' + w))
				snap.Seq = uint64(i)
				if err := s.Save([]*series.Snapshot{snap}); err != nil {
					t.Error(err)
					return
				}
				got, err := s.Load(snap.Topic)
				if err != nil || got.Seq != uint64(i) {
					t.Errorf("worker %d: Load = %v, %v", w, got, err)
					return
				}
			}
		}()
	}
	wg.Wait()
}

// BenchmarkSave is one flush: 1000 series with 2000-bucket windows in one
// transaction, fsynced on commit (the default).
func BenchmarkSave(b *testing.B) {
	for _, sync := range []bool{true, false} {
		name := "fsync"
		var opts []Option
		if !sync {
			name, opts = "nosync", []Option{NoSync()}
		}
		b.Run(name, func(b *testing.B) {
			s := openTest(b, opts...)
			batch := make([]*series.Snapshot, 1000)
			total := 0
			for i := range batch {
				snap := *window2000()
				snap.Topic = "bench.series." + strings.Repeat("x", i%7) + string(rune('a'+i%26)) + string(rune('a'+i/26))
				batch[i] = &snap
				total += EncodedLen(&snap)
			}
			b.SetBytes(int64(total))
			b.ReportAllocs()
			for b.Loop() {
				if err := s.Save(batch); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// A Batch holds its own copy of each record: a snapshot changed after Add
// does not change what Commit writes, and a reset Batch can be refilled.
func TestBatchCopiesAtAdd(t *testing.T) {
	s := openTest(t)
	var b Batch
	snap := &series.Snapshot{Topic: "shop.orders", Kind: "counter", StepSeconds: 60, Seq: 7, Window: []float64{1, 2, 3}}
	if err := b.Add(snap); err != nil {
		t.Fatal(err)
	}
	snap.Seq, snap.Window[0] = 8, 99 // the series moves on before the commit
	if err := s.Commit(&b); err != nil {
		t.Fatal(err)
	}
	got, err := s.Load("shop.orders")
	if err != nil {
		t.Fatal(err)
	}
	if got.Seq != 7 || got.Window[0] != 1 {
		t.Fatalf("committed seq %d window[0] %g, want the values at Add (7, 1)", got.Seq, got.Window[0])
	}
	b.Reset()
	if b.Len() != 0 {
		t.Fatalf("Len after Reset = %d", b.Len())
	}
	if err := b.Add(snap); err != nil {
		t.Fatal(err)
	}
	if err := s.Commit(&b); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.Load("shop.orders"); got.Seq != 8 {
		t.Fatalf("second commit: seq %d, want 8", got.Seq)
	}
	if err := b.Add(&series.Snapshot{}); !errors.Is(err, ErrInvalid) {
		t.Fatalf("empty topic: %v, want ErrInvalid", err)
	}
}

// A Batch larger than one chunk: records spread over several chunks, one
// larger than a chunk gets its own, each commits intact, and refilling
// the batch after Reset allocates nothing.
func TestBatchChunks(t *testing.T) {
	s := openTest(t)
	var snaps []*series.Snapshot
	for i := range 300 { // about 16 KB each: several chunks
		snap := *window2000()
		snap.Topic = fmt.Sprintf("disk.vol%03d.used", i)
		snap.Seq = uint64(i)
		snaps = append(snaps, &snap)
		if i == 150 {
			big := *window2000()
			big.Topic = "disk.big.used"
			big.Window = make([]float64, 3*batchChunk/8) // over a chunk on its own
			for k := range big.Window {
				big.Window[k] = float64(k)
			}
			snaps = append(snaps, &big)
		}
	}
	var b Batch
	fill := func() {
		b.Reset()
		for _, snap := range snaps {
			if err := b.Add(snap); err != nil {
				t.Fatal(err)
			}
		}
	}
	fill()
	if b.Len() != len(snaps) || b.used < 5 {
		t.Fatalf("Len %d (want %d), %d chunks in use (want at least 5)", b.Len(), len(snaps), b.used)
	}
	if err := s.Commit(&b); err != nil {
		t.Fatal(err)
	}
	for _, want := range snaps {
		got, err := s.Load(want.Topic)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(Encode(nil, got), Encode(nil, want)) {
			t.Fatalf("%s: the committed record differs from the snapshot", want.Topic)
		}
	}
	if allocs := testing.AllocsPerRun(3, fill); allocs != 0 {
		t.Fatalf("refilling a reset batch: %v allocations, want 0", allocs)
	}
}

// SetAside moves a record byte for byte into the set-aside bucket: the
// topic then has no record (a fresh series may take it), the set-aside
// copy keeps the bytes and tells why they do not decode, and a second
// set-aside of the same topic keeps the first. The file stays a valid
// store for Check and for a read-only open.
func TestSetAside(t *testing.T) {
	dir := t.TempDir()
	s := openTestIn(t, dir)
	good := &series.Snapshot{Topic: "disk.vol1.used", Kind: "gauge", StepSeconds: 300, Seq: 5, Window: []float64{1, 2}}
	bad := &series.Snapshot{Topic: "shop.orders", Kind: "counter", StepSeconds: 60, Seq: 9}
	if err := s.Save([]*series.Snapshot{good, bad}); err != nil {
		t.Fatal(err)
	}
	broken := Encode(nil, bad)
	broken[len(broken)/2] ^= 0xff
	if err := s.db.Update(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketSeries).Put([]byte(bad.Topic), broken)
	}); err != nil {
		t.Fatal(err)
	}
	t1 := time.Date(2026, 11, 3, 4, 5, 6, 7, time.UTC)
	if moved, err := s.SetAside(bad.Topic, t1); err != nil || !moved {
		t.Fatalf("SetAside: moved %v, %v", moved, err)
	}
	if moved, err := s.SetAside("no.such.topic", t1); err != nil || moved {
		t.Fatalf("SetAside of a topic without a record: moved %v, %v", moved, err)
	}
	if _, err := s.Load(bad.Topic); !errors.Is(err, ErrNotFound) {
		t.Fatalf("Load after SetAside: %v, want ErrNotFound", err)
	}
	// The topic starts afresh and is set aside again later: both copies stay.
	again := *bad
	again.Seq = 10
	if err := s.Save([]*series.Snapshot{&again}); err != nil {
		t.Fatal(err)
	}
	t2 := t1.Add(time.Hour)
	if _, err := s.SetAside(bad.Topic, t2); err != nil {
		t.Fatal(err)
	}
	recs, err := s.SetAsideRecords()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 2 || recs[0].Topic != bad.Topic || !recs[0].At.Equal(t1) || !recs[1].At.Equal(t2) {
		t.Fatalf("set-aside records %+v, want %s at %v and at %v", recs, bad.Topic, t1, t2)
	}
	if recs[0].Bytes != len(broken) || !errors.Is(recs[0].Err, ErrCorrupt) || recs[1].Err != nil {
		t.Fatalf("set-aside records %+v: want the broken one (%d bytes, corrupt) then the readable one", recs, len(broken))
	}
	var stored []byte
	if err := s.db.View(func(tx *bolt.Tx) error {
		stored = append(stored, tx.Bucket(bucketSetAside).Get(setAsideKey(bad.Topic, t1))...)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(stored, broken) {
		t.Fatal("the set-aside copy differs from the record as it was found")
	}
	if err := s.Check(); err != nil {
		t.Fatalf("Check after SetAside: %v", err)
	}
	info, err := s.Info()
	if err != nil || info.Series != 1 || info.SetAside != 2 {
		t.Fatalf("Info %+v, %v: want 1 series, 2 set aside", info, err)
	}
	s.Close()
	ro := openTestIn(t, dir, ReadOnly())
	if got, err := ro.Load(good.Topic); err != nil || got.Seq != 5 {
		t.Fatalf("read-only Load of the intact record: %+v, %v", got, err)
	}
	if _, err := ro.SetAside(good.Topic, t2); err == nil {
		t.Fatal("SetAside on a read-only store succeeded")
	}
}
