package state

import (
	"errors"
	"fmt"
)

// Sentinel errors. Test for them with errors.Is; the errors returned carry
// the topic, the path or the offset as well.
var (
	// ErrCorrupt is returned by Decode, Load, LoadAll and Check when a record
	// is damaged: bad magic, a checksum mismatch, a truncated record, or a
	// field no encoder writes. The concrete error is a *CorruptError.
	ErrCorrupt = errors.New("state: corrupt record")

	// ErrVersion is returned when a record (or the store's meta bucket)
	// carries a format version this build does not read. The concrete error
	// is a *VersionError holding the version found.
	ErrVersion = errors.New("state: unsupported format version")

	// ErrNotFound is returned by Load when no record exists for the topic.
	ErrNotFound = errors.New("state: no record for topic")

	// ErrLocked is returned by Open when another process holds the file (a
	// running daemon) for longer than the lock timeout. The concrete error
	// is a *LockedError naming the path.
	ErrLocked = errors.New("state: file is held by another process")

	// ErrNoState is returned by Open with ReadOnly when the state file does
	// not exist (a read-only open never creates it).
	ErrNoState = errors.New("state: no state file")

	// ErrNotState is returned by Open and Check when the file is a bbolt
	// database without forewarn's buckets.
	ErrNotState = errors.New("state: not a forewarn state file")

	// ErrTooLarge is returned by Save when a snapshot would encode to more
	// bytes than one bbolt value may hold, or its topic is longer than a
	// bbolt key may be.
	ErrTooLarge = errors.New("state: record too large")

	// ErrInvalid is returned by Save for a nil snapshot or an empty topic.
	ErrInvalid = errors.New("state: invalid snapshot")

	// ErrClosed is returned by every Store method called after Close.
	ErrClosed = errors.New("state: store is closed")
)

// Fault names what is wrong with a corrupt record.
type Fault uint8

// The faults Decode reports.
const (
	FaultMagic     Fault = iota + 1 // the record does not start with the magic bytes
	FaultTruncated                  // the record ends before its declared length or before a field
	FaultLength                     // the declared length is impossible, or bytes follow the record
	FaultChecksum                   // the CRC-32C does not match the bytes
	FaultField                      // a field holds a value no encoder writes
)

func (f Fault) String() string {
	switch f {
	case FaultMagic:
		return "bad magic"
	case FaultTruncated:
		return "truncated"
	case FaultLength:
		return "bad length"
	case FaultChecksum:
		return "CRC mismatch"
	case FaultField:
		return "bad field"
	}
	return fmt.Sprintf("fault(%d)", uint8(f))
}

// CorruptError describes a damaged record. errors.Is(err, ErrCorrupt) holds.
type CorruptError struct {
	Fault  Fault
	Offset int    // byte offset in the record where the problem was found
	Detail string // what was being read, in words
	Topic  string // the key the record is stored under; "" from Decode
}

func (e *CorruptError) Error() string {
	rec := "record"
	if e.Topic != "" {
		rec = fmt.Sprintf("record %q", e.Topic)
	}
	return fmt.Sprintf("state: corrupt %s: %s at byte %d (%s)", rec, e.Fault, e.Offset, e.Detail)
}

// Is reports whether target is ErrCorrupt.
func (e *CorruptError) Is(target error) bool { return target == ErrCorrupt }

// VersionError reports a format version this build does not read.
// errors.Is(err, ErrVersion) holds.
type VersionError struct {
	What  string // "record", `record "<topic>"` or "store <path>"
	Found uint16 // the version in the data
	Max   uint16 // the newest version this build reads
}

func (e *VersionError) Error() string {
	return fmt.Sprintf("state: %s has format version %d; this build reads versions 1 to %d", e.What, e.Found, e.Max)
}

// Is reports whether target is ErrVersion.
func (e *VersionError) Is(target error) bool { return target == ErrVersion }

// LockedError reports that another process holds the state file.
// errors.Is(err, ErrLocked) holds.
type LockedError struct {
	Path string
}

func (e *LockedError) Error() string {
	return fmt.Sprintf("state: %s is held by another process (is a daemon running?)", e.Path)
}

// Is reports whether target is ErrLocked.
func (e *LockedError) Is(target error) bool { return target == ErrLocked }
