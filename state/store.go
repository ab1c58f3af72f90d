package state

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sync"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"

	"forewarn/engine/series"
)

// FileName is the name of the state file inside the data directory.
const FileName = "forewarn.db"

// StoreVersion is the layout version of the store (its buckets and meta
// keys), kept in the meta bucket under "format". Records carry their own
// FormatVersion.
const StoreVersion uint16 = 1

// DefaultLockTimeout is how long Open waits for another process to release
// the file before it returns a *LockedError.
const DefaultLockTimeout = time.Second

var (
	bucketSeries   = []byte("series")
	bucketMeta     = []byte("meta")
	bucketSetAside = []byte("set-aside")
	keyFormat      = []byte("format")
	keyCreated     = []byte("created")
)

// Option is an optional knob of Open.
type Option func(*options)

type options struct {
	readOnly    bool
	noSync      bool
	lockTimeout time.Duration
}

// ReadOnly opens the file for reading only (the CLI). The file must exist;
// it is never created or changed, and other read-only opens may share it,
// but a daemon holding it makes Open fail with a *LockedError.
func ReadOnly() Option { return func(o *options) { o.readOnly = true } }

// NoSync skips the fsync at each commit. For tests only: a crash or power
// loss can then lose or damage committed state. The default syncs.
func NoSync() Option { return func(o *options) { o.noSync = true } }

// LockTimeout sets how long Open waits for the file lock (default
// DefaultLockTimeout). Zero or negative means the default.
func LockTimeout(d time.Duration) Option { return func(o *options) { o.lockTimeout = d } }

// Store is the state file: one bbolt database with a "series" bucket
// (topic → record) and a "meta" bucket. All methods are safe for
// concurrent use by multiple goroutines; writes are serialised by bbolt,
// reads run in parallel with each other and with a write.
type Store struct {
	db       *bolt.DB
	path     string
	readOnly bool

	mu     sync.Mutex // serialises Commits
	saveMu sync.Mutex // guards batch between Saves
	batch  Batch      // reused by Save

	closeOnce sync.Once
	closeErr  error
}

// Open opens (or, unless ReadOnly, creates) dir/forewarn.db. A new
// directory gets mode 0700 and a new file mode 0600; an existing writable
// file with wider permissions is narrowed to 0600. The lock wait is
// bounded by LockTimeout; a file held by another process gives a
// *LockedError (errors.Is ErrLocked).
func Open(dir string, opts ...Option) (*Store, error) {
	o := options{lockTimeout: DefaultLockTimeout}
	for _, opt := range opts {
		opt(&o)
	}
	if o.lockTimeout <= 0 {
		o.lockTimeout = DefaultLockTimeout
	}
	path := filepath.Join(dir, FileName)

	if o.readOnly {
		if _, err := os.Stat(path); errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%w at %s", ErrNoState, path)
		}
	} else {
		if err := os.MkdirAll(dir, 0o700); err != nil {
			return nil, fmt.Errorf("state: create data directory: %w", err)
		}
		if fi, err := os.Stat(path); err == nil && fi.Mode().Perm()&^0o600 != 0 {
			if err := os.Chmod(path, 0o600); err != nil {
				return nil, fmt.Errorf("state: narrow permissions of %s: %w", path, err)
			}
		}
	}

	db, err := bolt.Open(path, 0o600, &bolt.Options{
		Timeout:  o.lockTimeout,
		ReadOnly: o.readOnly,
		NoSync:   o.noSync,
	})
	if errors.Is(err, berrors.ErrTimeout) {
		return nil, &LockedError{Path: path}
	}
	if err != nil {
		return nil, fmt.Errorf("state: open %s: %w", path, err)
	}
	s := &Store{db: db, path: path, readOnly: o.readOnly}
	if o.readOnly {
		err = db.View(func(tx *bolt.Tx) error { return checkMeta(tx, path) })
	} else {
		err = db.Update(func(tx *bolt.Tx) error { return initBuckets(tx, path) })
	}
	if err != nil {
		db.Close()
		return nil, err
	}
	return s, nil
}

// initBuckets creates the buckets and meta keys of a new file and checks
// those of an existing one.
func initBuckets(tx *bolt.Tx, path string) error {
	if tx.Bucket(bucketMeta) == nil && tx.Bucket(bucketSeries) == nil {
		for _, name := range tx.Inspect().Children {
			return fmt.Errorf("%w: %s holds bucket %q", ErrNotState, path, name.Name)
		}
		meta, err := tx.CreateBucket(bucketMeta)
		if err != nil {
			return fmt.Errorf("state: create meta bucket: %w", err)
		}
		if err := meta.Put(keyFormat, le.AppendUint16(nil, StoreVersion)); err != nil {
			return fmt.Errorf("state: write meta: %w", err)
		}
		created := time.Now().UTC().Format(time.RFC3339Nano)
		if err := meta.Put(keyCreated, []byte(created)); err != nil {
			return fmt.Errorf("state: write meta: %w", err)
		}
		if _, err := tx.CreateBucket(bucketSeries); err != nil {
			return fmt.Errorf("state: create series bucket: %w", err)
		}
	}
	return checkMeta(tx, path)
}

// checkMeta verifies that both buckets exist and that the store layout
// version is one this build reads.
func checkMeta(tx *bolt.Tx, path string) error {
	meta := tx.Bucket(bucketMeta)
	if meta == nil || tx.Bucket(bucketSeries) == nil {
		return fmt.Errorf("%w: %s lacks its buckets", ErrNotState, path)
	}
	v := meta.Get(keyFormat)
	if len(v) != 2 {
		return fmt.Errorf("%w: %s has a meta format of %d bytes, want 2", ErrNotState, path, len(v))
	}
	if got := le.Uint16(v); got == 0 || got > StoreVersion {
		return &VersionError{What: "store " + path, Found: got, Max: StoreVersion}
	}
	return nil
}

// Path returns the path of the state file.
func (s *Store) Path() string { return s.path }

// wrap translates bbolt's closed-database error into ErrClosed.
func wrap(op string, err error) error {
	if errors.Is(err, berrors.ErrDatabaseNotOpen) {
		return fmt.Errorf("%w (%s)", ErrClosed, op)
	}
	return err
}

// Load returns the snapshot stored for topic, ErrNotFound if there is
// none, or the decode error (ErrCorrupt, ErrVersion) of a damaged record.
func (s *Store) Load(topic string) (*series.Snapshot, error) {
	var snap *series.Snapshot
	err := s.db.View(func(tx *bolt.Tx) error {
		v := tx.Bucket(bucketSeries).Get([]byte(topic))
		if v == nil {
			return fmt.Errorf("%w %q", ErrNotFound, topic)
		}
		var err error
		snap, err = decodeFor(topic, v)
		return err
	})
	return snap, wrap("load", err)
}

// decodeFor decodes the record stored under key topic and checks that it
// names the same topic.
func decodeFor(topic string, v []byte) (*series.Snapshot, error) {
	snap, err := Decode(v)
	var ce *CorruptError
	var ve *VersionError
	switch {
	case errors.As(err, &ce):
		ce.Topic = topic
		return nil, ce
	case errors.As(err, &ve):
		ve.What = fmt.Sprintf("record %q", topic)
		return nil, ve
	case err != nil:
		return nil, fmt.Errorf("state: record %q: %w", topic, err)
	case snap.Topic != topic:
		return nil, &CorruptError{Fault: FaultField, Offset: headerLen, Topic: topic,
			Detail: fmt.Sprintf("the record names topic %q", snap.Topic)}
	}
	return snap, nil
}

type loaded struct {
	topic string
	snap  *series.Snapshot
	err   error
}

// LoadAll decodes every record, in topic byte order, and calls fn once per
// topic: with the snapshot, or with a nil snapshot and the decode error of
// that topic's record (a corrupt record does not stop the others). fn runs
// after the read transaction has ended, so it may call any Store method. A
// non-nil error from fn stops the walk and is returned unchanged.
func (s *Store) LoadAll(fn func(topic string, s *series.Snapshot, err error) error) error {
	var all []loaded
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketSeries).ForEach(func(k, v []byte) error {
			topic := string(k)
			snap, err := decodeFor(topic, v)
			all = append(all, loaded{topic, snap, err})
			return nil
		})
	})
	if err != nil {
		return wrap("load all", err)
	}
	for _, l := range all {
		if err := fn(l.topic, l.snap, l.err); err != nil {
			return err
		}
	}
	return nil
}

// Batch is a set of encoded records ready to be committed together. The
// daemon fills one on its loop goroutine (Add copies the snapshot into the
// batch's own bytes, so the series may change at once) and commits it on
// another (Commit). A Batch is not safe for concurrent use.
//
// The records are stored whole in chunks of batchChunk bytes (a larger
// record gets a chunk of its own), so that adding a record never moves
// the ones before it: a flush of thousands of full windows is some
// hundred megabytes, and one growing buffer would copy it several times
// over as it grew. Reset keeps the chunks, so a steady flush allocates
// nothing.
type Batch struct {
	chunks [][]byte // chunks[:used] hold this batch's records
	used   int
	recs   []batchRecord
}

// batchRecord is one record of a Batch: its key and value, in a chunk.
type batchRecord struct{ key, value []byte }

// batchChunk is the size of a Batch's chunks: large enough that a chunk
// holds dozens of full records, small enough that a half-empty last one
// wastes little.
const batchChunk = 1 << 20

// Reset empties the batch, keeping its chunks.
func (b *Batch) Reset() {
	for i := range b.chunks[:b.used] {
		b.chunks[i] = b.chunks[i][:0]
	}
	b.used = 0
	clear(b.recs) // drop the references into the chunks
	b.recs = b.recs[:0]
}

// Len returns the number of records in the batch.
func (b *Batch) Len() int { return len(b.recs) }

// room makes the chunk at b.used-1 one with n free bytes and returns it.
func (b *Batch) room(n int) []byte {
	if b.used > 0 {
		if c := b.chunks[b.used-1]; cap(c)-len(c) >= n {
			return c
		}
	}
	if b.used == len(b.chunks) {
		b.chunks = append(b.chunks, nil)
	}
	if cap(b.chunks[b.used]) < n {
		b.chunks[b.used] = make([]byte, 0, max(n, batchChunk))
	}
	b.used++
	return b.chunks[b.used-1]
}

// Add encodes snap into the batch under its topic. A later record for the
// same topic wins at Commit.
func (b *Batch) Add(snap *series.Snapshot) error {
	switch {
	case snap == nil:
		return fmt.Errorf("%w: save: nil snapshot", ErrInvalid)
	case snap.Topic == "":
		return fmt.Errorf("%w: save: empty topic", ErrInvalid)
	case len(snap.Topic) > bolt.MaxKeySize:
		return fmt.Errorf("%w: save: topic of %d bytes (at most %d)", ErrTooLarge, len(snap.Topic), bolt.MaxKeySize)
	}
	n := EncodedLen(snap)
	if n > maxRecordLen {
		return fmt.Errorf("%w: save %q: %d bytes (at most %d)", ErrTooLarge, snap.Topic, n, maxRecordLen)
	}
	c := b.room(len(snap.Topic) + n)
	start := len(c)
	c = append(c, snap.Topic...)
	k := len(c)
	c = Encode(c, snap) // within the chunk's capacity: EncodedLen is exact
	b.chunks[b.used-1] = c
	b.recs = append(b.recs, batchRecord{key: c[start:k:k], value: c[k:len(c):len(c)]})
	return nil
}

// Commit writes every record of b in one read-write transaction: the whole
// batch is committed (and, by default, fsynced) or none of it is. b must
// not change until Commit returns.
func (s *Store) Commit(b *Batch) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	err := s.db.Update(func(tx *bolt.Tx) error {
		bk := tx.Bucket(bucketSeries)
		for _, r := range b.recs {
			if err := bk.Put(r.key, r.value); err != nil {
				return fmt.Errorf("state: save %q: %w", r.key, err)
			}
		}
		return nil
	})
	return wrap("save", err)
}

// Save writes every snapshot of batch in one read-write transaction, keyed
// by its topic: the whole batch is committed (and, by default, fsynced)
// or none of it is. A later entry for the same topic wins. It is Add for
// each snapshot into a Batch the Store keeps, then Commit.
func (s *Store) Save(batch []*series.Snapshot) error {
	s.saveMu.Lock()
	defer s.saveMu.Unlock()
	s.batch.Reset()
	for i, snap := range batch {
		if err := s.batch.Add(snap); err != nil {
			return fmt.Errorf("%w (batch[%d])", err, i)
		}
	}
	return s.Commit(&s.batch)
}

// Delete removes the record of topic. Deleting a topic without a record is
// not an error.
func (s *Store) Delete(topic string) error {
	if topic == "" {
		return fmt.Errorf("%w: delete: empty topic", ErrInvalid)
	}
	err := s.db.Update(func(tx *bolt.Tx) error {
		if err := tx.Bucket(bucketSeries).Delete([]byte(topic)); err != nil {
			return fmt.Errorf("state: delete %q: %w", topic, err)
		}
		return nil
	})
	return wrap("delete", err)
}

// Check verifies the whole file: bbolt's page-level consistency check
// (Tx.Check), the meta bucket, and a decode of every record. It returns
// nil, or every problem found joined with errors.Join (one per line of its
// message; errors.Is works through it).
func (s *Store) Check() error {
	var problems []error
	err := s.db.View(func(tx *bolt.Tx) error {
		for err := range tx.Check() {
			problems = append(problems, fmt.Errorf("state: bbolt check: %w", err))
		}
		if err := checkMeta(tx, s.path); err != nil {
			problems = append(problems, err)
			return nil
		}
		return tx.Bucket(bucketSeries).ForEach(func(k, v []byte) error {
			if _, err := decodeFor(string(k), v); err != nil {
				problems = append(problems, err)
			}
			return nil
		})
	})
	if err != nil {
		return wrap("check", err)
	}
	return errors.Join(problems...)
}

// SetAside moves the record of topic, byte for byte, out of the series
// bucket into the set-aside bucket, under the topic and the time at:
// the daemon does so with a record it will not continue from (unreadable,
// of a newer format, or of another kind or step), before the topic starts
// afresh, so that its next flush does not overwrite the only copy. It
// reports whether topic had a record.
func (s *Store) SetAside(topic string, at time.Time) (bool, error) {
	key := setAsideKey(topic, at)
	if len(key) > bolt.MaxKeySize {
		return false, fmt.Errorf("%w: set aside: topic of %d bytes", ErrTooLarge, len(topic))
	}
	moved := false
	err := s.db.Update(func(tx *bolt.Tx) error {
		series := tx.Bucket(bucketSeries)
		v := series.Get([]byte(topic))
		if v == nil {
			return nil
		}
		aside, err := tx.CreateBucketIfNotExists(bucketSetAside)
		if err != nil {
			return fmt.Errorf("state: create set-aside bucket: %w", err)
		}
		if err := aside.Put(key, v); err != nil {
			return fmt.Errorf("state: set aside %q: %w", topic, err)
		}
		moved = true
		return series.Delete([]byte(topic))
	})
	if err != nil {
		return false, wrap("set aside", err)
	}
	return moved, nil
}

// SetAsideRecord is one record in the set-aside bucket.
type SetAsideRecord struct {
	Topic string
	At    time.Time // when it was set aside
	Bytes int       // size of the record as it was found
	Err   error     // why it does not decode now (nil if it does)
}

// SetAsideRecords lists the set-aside bucket in topic order, then by time.
func (s *Store) SetAsideRecords() ([]SetAsideRecord, error) {
	var out []SetAsideRecord
	err := s.db.View(func(tx *bolt.Tx) error {
		aside := tx.Bucket(bucketSetAside)
		if aside == nil {
			return nil
		}
		return aside.ForEach(func(k, v []byte) error {
			topic, at, ok := parseSetAsideKey(k)
			if !ok {
				return fmt.Errorf("%w: set-aside key %q", ErrNotState, k)
			}
			_, derr := decodeFor(topic, v)
			out = append(out, SetAsideRecord{Topic: topic, At: at, Bytes: len(v), Err: derr})
			return nil
		})
	})
	if err != nil {
		return nil, wrap("set-aside records", err)
	}
	return out, nil
}

// setAsideKey is topic, a zero byte (which no topic holds) and the time as
// big-endian Unix nanoseconds, so that keys sort by topic, then by time.
func setAsideKey(topic string, at time.Time) []byte {
	k := make([]byte, 0, len(topic)+9)
	k = append(k, topic...)
	k = append(k, 0)
	return binary.BigEndian.AppendUint64(k, uint64(at.UnixNano()))
}

func parseSetAsideKey(k []byte) (topic string, at time.Time, ok bool) {
	if len(k) < 10 || k[len(k)-9] != 0 {
		return "", time.Time{}, false
	}
	ns := int64(binary.BigEndian.Uint64(k[len(k)-8:]))
	return string(k[:len(k)-9]), time.Unix(0, ns).UTC(), true
}

// Info describes a state file.
type Info struct {
	Path    string
	Format  uint16    // StoreVersion of the file
	Created time.Time // when the file was created (zero if unreadable)
	Series  int       // number of records
	// SetAside is the number of records set aside (Store.SetAside).
	SetAside int
	Bytes    int64 // file size
}

// Info returns the store's meta data, record count and file size.
func (s *Store) Info() (Info, error) {
	info := Info{Path: s.path}
	err := s.db.View(func(tx *bolt.Tx) error {
		meta := tx.Bucket(bucketMeta)
		if v := meta.Get(keyFormat); len(v) == 2 {
			info.Format = le.Uint16(v)
		}
		info.Created, _ = time.Parse(time.RFC3339Nano, string(meta.Get(keyCreated)))
		info.Series = tx.Bucket(bucketSeries).Stats().KeyN
		if aside := tx.Bucket(bucketSetAside); aside != nil {
			info.SetAside = aside.Stats().KeyN
		}
		return nil
	})
	if err != nil {
		return Info{}, wrap("info", err)
	}
	info.Bytes, err = s.Size()
	return info, err
}

// Size returns the size of the state file in bytes.
func (s *Store) Size() (int64, error) {
	fi, err := os.Stat(s.path)
	if err != nil {
		return 0, fmt.Errorf("state: size: %w", err)
	}
	return fi.Size(), nil
}

// Close closes the file and releases its lock. It waits for transactions
// in flight. Calling it again returns the first call's result.
func (s *Store) Close() error {
	s.closeOnce.Do(func() {
		if err := s.db.Close(); err != nil {
			s.closeErr = fmt.Errorf("state: close %s: %w", s.path, err)
		}
	})
	return s.closeErr
}
