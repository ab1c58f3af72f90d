package state

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"math"
	"slices"

	"forewarn/engine/arima"
	"forewarn/engine/series"
)

// FormatVersion is the record format version Encode writes. Decode reads
// every version from 1 to FormatVersion.
const FormatVersion uint16 = 4

// The envelope, identical in every format version (doc.go).
var magic = [4]byte{'f', 'w', 's', 'r'}

const (
	headerLen   = 10 // magic (4) + version (2) + length (4)
	crcLen      = 4
	envelopeLen = headerLen + crcLen

	// maxRecordLen is the largest record Save stores: bbolt's MaxValueSize.
	maxRecordLen = 1<<31 - 2
)

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

var le = binary.LittleEndian

// Fixed widths of the payload parts of the current version, in bytes.
const (
	strHead   = 4 // uint32 length before a string
	sliceHead = 4 // uint32 count before a float64 slice
	// every fixed-width field of the snapshot outside Transform, Model, Alerts
	fixedTop = 8 + 4 + 8 + // Seq, SeqApplied, StepSeconds
		1 + 8 + 8 + // HasOpen, OpenBucket, OpenValue
		8 + 8 + 1 + 8 + // CounterOffset, CounterLastRaw, CounterHasRaw, CounterResets
		8 + // WindowEnd
		8 + 8 + 8 + // Closed, SinceRefit, Late
		8 + // RefitFailures
		1 + // Model presence
		4 // alert count
	fixedTransform = 8 + 8 + 8 + 8 + 8 + 8           // Lambda, Loc, Scale, RunN, RunMean, RunM2
	fixedModel     = 7*8 + 1 + 1 + 8 + 8 + 8 + 8 + 8 // orders and period, Mean, Drift, Sigma2, LogLik, AICc, NObs, FittedAt
	alertMinLen    = strHead + 1 + 8 + 8             // empty Rule, Raised, Since, Probability

	// version 4: the model's regression design, cycles and outliers, and
	// the online check's state and last flag
	fixedModel4  = 8 + 3*4 + 8               // NX, three counts, SearchedTo
	columnMinLen = 1 + sliceHead             // Kind, empty Values
	cycleMinLen  = 8 + strHead + 8           // Seconds, empty Terms, K
	outlierLen   = 1 + 8 + 8 + 8             // Kind, Bucket, Size, Tau
	fixedTop4    = sliceHead + 8 + 1 + 8 + 8 // Guard count, Flag (Bucket, Verdict, Z), Flags
)

// EncodedLen returns the number of bytes Encode appends for s.
func EncodedLen(s *series.Snapshot) int {
	n := envelopeLen + fixedTop + fixedTransform
	n += strHead*5 + len(s.Topic) + len(s.Fingerprint) + len(s.Kind) + len(s.Transform.Name) + len(s.LastRefitNote)
	n += sliceHead + 8*len(s.Window)
	if m := s.Model; m != nil {
		n += fixedModel + 2*sliceHead + 8*(len(m.Params)+len(m.Filter))
		n += fixedModel4 + outlierLen*len(m.Outliers)
		for _, c := range m.Design {
			n += columnMinLen + 8*len(c.Values)
		}
		for _, c := range m.Cycles {
			n += cycleMinLen + len(c.Terms)
		}
	}
	n += fixedTop4 + 8*len(s.Guard)
	for i := range s.Alerts {
		n += alertMinLen + len(s.Alerts[i].Rule)
	}
	n += sliceHead + 8*len(s.Calibration)
	return n
}

// Encode appends the binary record of s (format FormatVersion, layout in
// doc.go) to dst and returns the extended slice. It does not allocate when
// cap(dst)-len(dst) >= EncodedLen(s). The encoding is canonical: Decode
// followed by Encode gives back the same bytes. Nil and empty slices encode
// alike. Encode panics if s is nil or the record would exceed 4 GiB
// (programmer errors; Save checks the size first).
func Encode(dst []byte, s *series.Snapshot) []byte {
	n := EncodedLen(s)
	if n > math.MaxUint32 {
		panic("state: record longer than 4 GiB")
	}
	dst = slices.Grow(dst, n)
	start := len(dst)
	dst = append(dst, magic[:]...)
	dst = le.AppendUint16(dst, FormatVersion)
	dst = le.AppendUint32(dst, uint32(n))

	dst = appendString(dst, s.Topic)
	dst = appendString(dst, s.Fingerprint)
	dst = le.AppendUint64(dst, s.Seq)
	dst = le.AppendUint32(dst, s.SeqApplied)
	dst = appendString(dst, s.Kind)
	dst = le.AppendUint64(dst, uint64(s.StepSeconds))

	dst = appendBool(dst, s.HasOpen)
	dst = le.AppendUint64(dst, uint64(s.OpenBucket))
	dst = appendFloat(dst, s.OpenValue)

	dst = appendFloat(dst, s.CounterOffset)
	dst = appendFloat(dst, s.CounterLastRaw)
	dst = appendBool(dst, s.CounterHasRaw)
	dst = le.AppendUint64(dst, s.CounterResets)

	dst = le.AppendUint64(dst, uint64(s.WindowEnd))
	dst = appendFloats(dst, s.Window)

	dst = le.AppendUint64(dst, s.Closed)
	dst = le.AppendUint64(dst, uint64(int64(s.SinceRefit)))
	dst = le.AppendUint64(dst, s.Late)

	t := &s.Transform
	dst = appendString(dst, t.Name)
	dst = appendFloat(dst, t.Lambda)
	dst = appendFloat(dst, t.Loc)
	dst = appendFloat(dst, t.Scale)
	dst = le.AppendUint64(dst, uint64(t.RunN))
	dst = appendFloat(dst, t.RunMean)
	dst = appendFloat(dst, t.RunM2)

	if m := s.Model; m == nil {
		dst = append(dst, 0)
	} else {
		dst = append(dst, 1)
		for _, v := range [...]int{m.Order[0], m.Order[1], m.Order[2], m.Seasonal[0], m.Seasonal[1], m.Seasonal[2], m.Period} {
			dst = le.AppendUint64(dst, uint64(int64(v)))
		}
		dst = appendBool(dst, m.Mean)
		dst = appendBool(dst, m.Drift)
		dst = appendFloats(dst, m.Params)
		dst = appendFloat(dst, m.Sigma2)
		dst = appendFloat(dst, m.LogLik)
		dst = appendFloat(dst, m.AICc)
		dst = le.AppendUint64(dst, uint64(int64(m.NObs)))
		dst = le.AppendUint64(dst, uint64(m.FittedAt))
		dst = appendFloats(dst, m.Filter)
		dst = le.AppendUint64(dst, uint64(int64(m.NX)))
		dst = le.AppendUint32(dst, uint32(len(m.Design)))
		for _, c := range m.Design {
			dst = append(dst, c.Kind)
			dst = appendFloats(dst, c.Values)
		}
		dst = le.AppendUint32(dst, uint32(len(m.Cycles)))
		for _, c := range m.Cycles {
			dst = appendFloat(dst, c.Seconds)
			dst = appendString(dst, c.Terms)
			dst = le.AppendUint64(dst, uint64(int64(c.K)))
		}
		dst = le.AppendUint32(dst, uint32(len(m.Outliers)))
		for _, o := range m.Outliers {
			dst = append(dst, o.Kind)
			dst = le.AppendUint64(dst, uint64(o.Bucket))
			dst = appendFloat(dst, o.Size)
			dst = appendFloat(dst, o.Tau)
		}
		dst = le.AppendUint64(dst, uint64(m.SearchedTo))
	}

	dst = le.AppendUint64(dst, s.RefitFailures)
	dst = appendString(dst, s.LastRefitNote)

	dst = le.AppendUint32(dst, uint32(len(s.Alerts)))
	for i := range s.Alerts {
		a := &s.Alerts[i]
		dst = appendString(dst, a.Rule)
		dst = appendBool(dst, a.Raised)
		dst = le.AppendUint64(dst, uint64(a.Since))
		dst = appendFloat(dst, a.Probability)
	}
	dst = appendFloats(dst, s.Calibration)
	dst = appendFloats(dst, s.Guard)
	dst = le.AppendUint64(dst, uint64(s.Flag.Bucket))
	dst = append(dst, s.Flag.Verdict)
	dst = appendFloat(dst, s.Flag.Z)
	dst = le.AppendUint64(dst, s.Flags)

	return le.AppendUint32(dst, crc32.Checksum(dst[start:], castagnoli))
}

func appendString(dst []byte, s string) []byte {
	dst = le.AppendUint32(dst, uint32(len(s)))
	return append(dst, s...)
}

func appendBool(dst []byte, v bool) []byte {
	if v {
		return append(dst, 1)
	}
	return append(dst, 0)
}

func appendFloat(dst []byte, v float64) []byte {
	return le.AppendUint64(dst, math.Float64bits(v))
}

// appendFloats writes the count and then the IEEE 754 bits of each value,
// so NaN payloads and signed zeros survive unchanged.
func appendFloats(dst []byte, v []float64) []byte {
	dst = le.AppendUint32(dst, uint32(len(v)))
	off := len(dst)
	dst = dst[:off+8*len(v)] // capacity reserved by Encode
	for i, x := range v {
		le.PutUint64(dst[off+8*i:], math.Float64bits(x))
	}
	return dst
}

// Decode parses one record written by Encode (any version from 1 to
// FormatVersion). It checks, in order: the magic bytes, the declared length
// against the bytes given, the CRC-32C, the version, then every field. The
// errors are a *CorruptError (errors.Is ErrCorrupt) naming the fault and
// the offset, or a *VersionError (errors.Is ErrVersion).
//
// Decode never panics, and it allocates only after checking a length
// against the bytes that remain, so the memory it allocates is bounded by
// a small multiple of len(b). The result does not alias b.
func Decode(b []byte) (*series.Snapshot, error) {
	if len(b) < len(magic) {
		if bytes.HasPrefix(magic[:], b) {
			return nil, &CorruptError{Fault: FaultTruncated, Offset: len(b), Detail: "record shorter than its header"}
		}
		return nil, &CorruptError{Fault: FaultMagic, Offset: 0, Detail: "not a forewarn series record"}
	}
	if !bytes.Equal(b[:len(magic)], magic[:]) {
		return nil, &CorruptError{Fault: FaultMagic, Offset: 0, Detail: "not a forewarn series record"}
	}
	if len(b) < headerLen {
		return nil, &CorruptError{Fault: FaultTruncated, Offset: len(b), Detail: "record shorter than its header"}
	}
	n := uint64(le.Uint32(b[6:10]))
	switch {
	case n < envelopeLen:
		return nil, &CorruptError{Fault: FaultLength, Offset: 6, Detail: fmt.Sprintf("declared length %d is shorter than the envelope", n)}
	case uint64(len(b)) < n:
		return nil, &CorruptError{Fault: FaultTruncated, Offset: len(b), Detail: fmt.Sprintf("record declares %d bytes, %d present", n, len(b))}
	case uint64(len(b)) > n:
		return nil, &CorruptError{Fault: FaultLength, Offset: int(n), Detail: fmt.Sprintf("%d bytes follow the declared end", uint64(len(b))-n)}
	}
	body := b[:n-crcLen]
	if got, want := crc32.Checksum(body, castagnoli), le.Uint32(b[n-crcLen:]); got != want {
		return nil, &CorruptError{Fault: FaultChecksum, Offset: int(n - crcLen), Detail: fmt.Sprintf("stored %08x, computed %08x", want, got)}
	}
	switch v := le.Uint16(b[4:6]); v {
	case 1, 2, 3, 4:
		return decodePayload(body, v)
	default:
		return nil, &VersionError{What: "record", Found: v, Max: FormatVersion}
	}
}

// reader walks a checksummed body. The first problem sticks in err; later
// reads return zero values.
type reader struct {
	b   []byte
	off int
	err *CorruptError
}

func (r *reader) fail(f Fault, what string) {
	if r.err == nil {
		r.err = &CorruptError{Fault: f, Offset: r.off, Detail: what}
	}
}

// take returns the next n bytes, or nil after recording a truncation.
func (r *reader) take(n uint64, what string) []byte {
	if r.err != nil {
		return nil
	}
	if n > uint64(len(r.b)-r.off) {
		r.fail(FaultTruncated, fmt.Sprintf("%s needs %d bytes, %d remain", what, n, len(r.b)-r.off))
		return nil
	}
	p := r.b[r.off : r.off+int(n)]
	r.off += int(n)
	return p
}

func (r *reader) u64(what string) uint64 {
	if p := r.take(8, what); p != nil {
		return le.Uint64(p)
	}
	return 0
}

func (r *reader) i64(what string) int64 { return int64(r.u64(what)) }

func (r *reader) f64(what string) float64 { return math.Float64frombits(r.u64(what)) }

// int reads an int64 field held in a Go int.
func (r *reader) int(what string) int {
	v := r.i64(what)
	if int64(int(v)) != v {
		r.fail(FaultField, what+" does not fit in an int")
		return 0
	}
	return int(v)
}

func (r *reader) u32(what string) uint32 {
	if p := r.take(4, what); p != nil {
		return le.Uint32(p)
	}
	return 0
}

func (r *reader) bool(what string) bool {
	p := r.take(1, what)
	if p == nil {
		return false
	}
	switch p[0] {
	case 0:
		return false
	case 1:
		return true
	}
	r.off--
	r.fail(FaultField, fmt.Sprintf("%s is %d, want 0 or 1", what, p[0]))
	return false
}

func (r *reader) byte(what string) byte {
	if p := r.take(1, what); p != nil {
		return p[0]
	}
	return 0
}

func (r *reader) str(what string) string {
	n := r.u32(what + " length")
	return string(r.take(uint64(n), what))
}

// floats reads a counted float64 slice; a count of zero gives nil.
func (r *reader) floats(what string) []float64 {
	n := uint64(r.u32(what + " count"))
	p := r.take(8*n, what)
	if len(p) == 0 {
		return nil
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = math.Float64frombits(le.Uint64(p[8*i:]))
	}
	return v
}

// decodePayload parses the payload of version 1 or 2; body is the record
// without its checksum, already verified. The versions differ only in the
// model's shape (doc.go).
func decodePayload(body []byte, version uint16) (*series.Snapshot, error) {
	r := &reader{b: body, off: headerLen}
	s := &series.Snapshot{}
	s.Topic = r.str("topic")
	s.Fingerprint = r.str("fingerprint")
	s.Seq = r.u64("seq")
	s.SeqApplied = r.u32("seq applied")
	s.Kind = r.str("kind")
	s.StepSeconds = r.i64("step seconds")

	s.HasOpen = r.bool("has-open flag")
	s.OpenBucket = r.i64("open bucket")
	s.OpenValue = r.f64("open value")

	s.CounterOffset = r.f64("counter offset")
	s.CounterLastRaw = r.f64("counter last raw")
	s.CounterHasRaw = r.bool("counter has-raw flag")
	s.CounterResets = r.u64("counter resets")

	s.WindowEnd = r.i64("window end")
	s.Window = r.floats("window")

	s.Closed = r.u64("closed")
	s.SinceRefit = r.int("since refit")
	s.Late = r.u64("late")

	t := &s.Transform
	t.Name = r.str("transform name")
	t.Lambda = r.f64("transform lambda")
	t.Loc = r.f64("transform loc")
	t.Scale = r.f64("transform scale")
	t.RunN = r.i64("transform run n")
	t.RunMean = r.f64("transform run mean")
	t.RunM2 = r.f64("transform run m2")

	if r.bool("model presence") {
		m := &series.ModelSnapshot{}
		var legacy string
		if version == 1 {
			legacy = r.str("model spec")
		} else {
			m.Order = [3]int{r.int("model p"), r.int("model d"), r.int("model q")}
			m.Seasonal = [3]int{r.int("model P"), r.int("model D"), r.int("model Q")}
			m.Period = r.int("model period")
		}
		m.Mean = r.bool("model mean flag")
		m.Drift = r.bool("model drift flag")
		if version == 1 && r.err == nil {
			migrateSpec(r, m, legacy)
		}
		m.Params = r.floats("model params")
		m.Sigma2 = r.f64("model sigma2")
		m.LogLik = r.f64("model loglik")
		m.AICc = r.f64("model aicc")
		m.NObs = r.int("model nobs")
		m.FittedAt = r.i64("model fitted at")
		m.Filter = r.floats("model filter")
		if version >= 4 {
			decodeModel4(r, m, len(body))
		}
		s.Model = m
	}

	s.RefitFailures = r.u64("refit failures")
	s.LastRefitNote = r.str("last refit note")

	if n := uint64(r.u32("alert count")); n > 0 && r.err == nil {
		if n > uint64(len(body)-r.off)/alertMinLen {
			r.fail(FaultTruncated, fmt.Sprintf("%d alerts cannot fit in %d bytes", n, len(body)-r.off))
		} else {
			s.Alerts = make([]series.AlertSnapshot, n)
			for i := range s.Alerts {
				a := &s.Alerts[i]
				a.Rule = r.str("alert rule")
				a.Raised = r.bool("alert raised flag")
				a.Since = r.i64("alert since")
				a.Probability = r.f64("alert probability")
			}
		}
	}
	if version >= 3 {
		s.Calibration = r.floats("calibration")
	}
	if version >= 4 {
		s.Guard = r.floats("guard state")
		s.Flag.Bucket = r.i64("guard flag bucket")
		s.Flag.Verdict = r.byte("guard flag verdict")
		s.Flag.Z = r.f64("guard flag z")
		s.Flags = r.u64("guard flags")
	}

	if r.err == nil && r.off != len(body) {
		r.fail(FaultField, fmt.Sprintf("%d bytes after the last field", len(body)-r.off))
	}
	if r.err != nil {
		return nil, r.err
	}
	return s, nil
}

// decodeModel4 reads the model fields of version 4: the regression design,
// the choice per cycle and the outliers found. Each count is checked
// against the bytes that remain before anything is allocated for it.
func decodeModel4(r *reader, m *series.ModelSnapshot, size int) {
	m.NX = r.int("model regressors")
	room := func(n uint64, min int, what string) bool {
		if r.err == nil && n > uint64(size-r.off)/uint64(min) {
			r.fail(FaultTruncated, fmt.Sprintf("%d %s cannot fit in %d bytes", n, what, size-r.off))
		}
		return r.err == nil && n > 0
	}
	if n := uint64(r.u32("column set count")); room(n, columnMinLen, "column sets") {
		m.Design = make([]series.ColumnSet, n)
		for i := range m.Design {
			m.Design[i].Kind = r.byte("column set kind")
			m.Design[i].Values = r.floats("column set values")
		}
	}
	if n := uint64(r.u32("cycle count")); room(n, cycleMinLen, "cycles") {
		m.Cycles = make([]series.CycleChoice, n)
		for i := range m.Cycles {
			m.Cycles[i].Seconds = r.f64("cycle seconds")
			m.Cycles[i].Terms = r.str("cycle terms")
			m.Cycles[i].K = r.int("cycle pairs")
		}
	}
	if n := uint64(r.u32("outlier count")); room(n, outlierLen, "outliers") {
		m.Outliers = make([]series.OutlierFound, n)
		for i := range m.Outliers {
			o := &m.Outliers[i]
			o.Kind = r.byte("outlier kind")
			o.Bucket = r.i64("outlier bucket")
			o.Size = r.f64("outlier size")
			o.Tau = r.f64("outlier tau")
		}
	}
	m.SearchedTo = r.i64("outlier search end")
}

// migrateSpec sets the model's orders and period from the spec string of a
// version-1 record (the spelling arima.ParseLegacySpec reads); the mean and
// drift flags stored beside it stay as they are. A string no version-1
// encoder wrote is a bad field, at the offset of the string's length.
func migrateSpec(r *reader, m *series.ModelSnapshot, legacy string) {
	sp, err := arima.ParseLegacySpec(legacy)
	if err != nil {
		r.off -= 2 + 4 + len(legacy) // back to the string's length field
		r.fail(FaultField, fmt.Sprintf("model spec %q: %v", legacy, err))
		return
	}
	m.Order = [3]int{sp.P, sp.D, sp.Q}
	m.Seasonal = [3]int{sp.SP, sp.SD, sp.SQ}
	m.Period = sp.Period
}
