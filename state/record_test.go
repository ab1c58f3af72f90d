package state

import (
	"bytes"
	"errors"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"testing"

	"forewarn/engine/series"
)

func TestRoundTripRandom(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	for i := range 500 {
		want := randomSnapshot(r, 300)
		b := Encode(nil, want)
		if len(b) != EncodedLen(want) {
			t.Fatalf("case %d: Encode wrote %d bytes, EncodedLen says %d", i, len(b), EncodedLen(want))
		}
		got, err := Decode(b)
		if err != nil {
			t.Fatalf("case %d: Decode: %v", i, err)
		}
		if d := diff(want, got); d != "" {
			t.Fatalf("case %d: round trip differs at %s", i, d)
		}
		if again := Encode(nil, got); !bytes.Equal(again, b) {
			t.Fatalf("case %d: re-encoding the decoded snapshot gives other bytes", i)
		}
	}
}

func TestRoundTripEdgeCases(t *testing.T) {
	nan := math.Float64frombits(0x7ff4000000000abc) // signalling NaN with a payload
	cases := map[string]*series.Snapshot{
		"zero value":         {},
		"empty slices":       {Topic: "a", Window: []float64{}, Alerts: []series.AlertSnapshot{}, Model: &series.ModelSnapshot{Params: []float64{}, Filter: []float64{}}},
		"model nil":          {Topic: "b", Window: []float64{1, 2, 3}},
		"model present zero": {Topic: "c", Model: &series.ModelSnapshot{}},
		"nan window": {Topic: "d", Window: []float64{nan, math.NaN(), -math.NaN(), math.Inf(-1), math.Copysign(0, -1)},
			OpenValue: nan, Model: &series.ModelSnapshot{Params: []float64{nan}, Filter: []float64{nan, 1}}},
		"extremes": {Topic: "e", Seq: math.MaxUint64, StepSeconds: math.MinInt64, OpenBucket: math.MaxInt64,
			WindowEnd: math.MinInt64, SinceRefit: math.MaxInt, Transform: series.TransformSnapshot{RunN: math.MinInt64},
			Model: &series.ModelSnapshot{NObs: math.MinInt, FittedAt: math.MaxInt64,
				Order: [3]int{math.MaxInt, -1, math.MinInt}, Seasonal: [3]int{-7, math.MaxInt, 3}, Period: math.MinInt}},
	}
	for name, want := range cases {
		t.Run(name, func(t *testing.T) {
			got, err := Decode(Encode(nil, want))
			if err != nil {
				t.Fatal(err)
			}
			if d := diff(want, got); d != "" {
				t.Fatalf("differs at %s", d)
			}
			if (want.Model == nil) != (got.Model == nil) {
				t.Fatalf("model presence: want %v, got %v", want.Model != nil, got.Model != nil)
			}
		})
	}
}

func TestEncodeAppends(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	a, b := randomSnapshot(r, 50), randomSnapshot(r, 50)
	buf := Encode([]byte("prefix"), a)
	mid := len(buf)
	buf = Encode(buf, b)
	if string(buf[:6]) != "prefix" {
		t.Fatalf("prefix overwritten: %q", buf[:6])
	}
	for i, part := range [][]byte{buf[6:mid], buf[mid:]} {
		s, err := Decode(part)
		if err != nil {
			t.Fatalf("record %d: %v", i, err)
		}
		if d := diff([]*series.Snapshot{a, b}[i], s); d != "" {
			t.Fatalf("record %d differs at %s", i, d)
		}
	}
}

// Every single-byte change of a record is detected: a CRC whose generator
// has degree 32 and a non-zero constant term detects every error burst of
// up to 32 bits (Peterson & Brown 1961, "Cyclic codes for error
// detection", Proc. IRE 49(1)); CRC-32C's generator is from Castagnoli,
// Braeuer & Herrmann 1993 (IEEE Trans. Commun. 41(6)). So a flipped byte
// cannot pass the checksum; the magic and length fields fail earlier with
// their own fault.
func TestEveryByteFlipDetected(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for c := range 4 {
		rec := Encode(nil, randomSnapshot(r, 40))
		for i := range rec {
			for _, mask := range []byte{0x01, 0x80, 0xff} {
				bad := bytes.Clone(rec)
				bad[i] ^= mask
				s, err := Decode(bad)
				if err == nil {
					t.Fatalf("case %d: flip %#x at byte %d of %d decoded without error: %+v", c, mask, i, len(rec), s)
				}
				var ce *CorruptError
				if !errors.As(err, &ce) || !errors.Is(err, ErrCorrupt) {
					t.Fatalf("case %d: flip at byte %d: error %v is not a *CorruptError", c, i, err)
				}
				want := FaultChecksum
				switch {
				case i < 4:
					want = FaultMagic
				case i >= 6 && i < 10:
					want = 0 // length field: truncated or bad length, depending on the new value
				}
				if want != 0 && ce.Fault != want {
					t.Fatalf("case %d: flip at byte %d: fault %v, want %v", c, i, ce.Fault, want)
				}
				if want == 0 && ce.Fault != FaultTruncated && ce.Fault != FaultLength {
					t.Fatalf("case %d: flip in length field (byte %d): fault %v", c, i, ce.Fault)
				}
			}
		}
	}
}

func TestTruncationAtEveryLength(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 8))
	rec := Encode(nil, randomSnapshot(r, 30))
	for n := range len(rec) {
		_, err := Decode(rec[:n])
		var ce *CorruptError
		if !errors.As(err, &ce) || ce.Fault != FaultTruncated {
			t.Fatalf("truncated to %d of %d bytes: error %v, want fault %v", n, len(rec), err, FaultTruncated)
		}
	}
	_, err := Decode(append(bytes.Clone(rec), 0))
	var ce *CorruptError
	if !errors.As(err, &ce) || ce.Fault != FaultLength {
		t.Fatalf("one trailing byte: error %v, want fault %v", err, FaultLength)
	}
}

// reseal rewrites the length and checksum of a record after a test edits
// it, so that the decoder gets past the envelope to the part under test.
func reseal(b []byte) []byte {
	le.PutUint32(b[6:], uint32(len(b)))
	le.PutUint32(b[len(b)-4:], crc32.Checksum(b[:len(b)-4], castagnoli))
	return b
}

func TestVersionMismatch(t *testing.T) {
	rec := Encode(nil, &series.Snapshot{Topic: "x"})
	for _, v := range []uint16{0, FormatVersion + 1, math.MaxUint16} {
		bad := bytes.Clone(rec)
		le.PutUint16(bad[4:], v)
		_, err := Decode(reseal(bad))
		var ve *VersionError
		if !errors.As(err, &ve) || !errors.Is(err, ErrVersion) || errors.Is(err, ErrCorrupt) {
			t.Fatalf("version %d: error %v, want a *VersionError", v, err)
		}
		if ve.Found != v || ve.Max != FormatVersion {
			t.Fatalf("version %d: VersionError carries found %d max %d", v, ve.Found, ve.Max)
		}
	}
}

// Fields that pass the checksum but hold values no encoder writes.
func TestBadFieldsBehindValidChecksum(t *testing.T) {
	base := Encode(nil, &series.Snapshot{Topic: "x", Window: []float64{1, 2}})
	hasOpen := headerLen + 4 + 1 + 4 + 8 + 4 + 4 + 8 // after topic "x", empty fingerprint, seq, seq applied, empty kind, step
	windowCount := hasOpen + 1 + 8 + 8 + 8 + 8 + 1 + 8 + 8
	tests := []struct {
		name  string
		edit  func(b []byte) []byte
		fault Fault
	}{
		{"bool byte 2", func(b []byte) []byte { b[hasOpen] = 2; return b }, FaultField},
		{"window count too large", func(b []byte) []byte { le.PutUint32(b[windowCount:], 1<<31); return b }, FaultTruncated},
		{"string length too large", func(b []byte) []byte { le.PutUint32(b[headerLen:], math.MaxUint32); return b }, FaultTruncated},
		{"extra byte inside payload", func(b []byte) []byte {
			return append(b[:len(b)-4:len(b)-4], 0, 0, 0, 0, 0)
		}, FaultField},
		{"alert count too large", func(b []byte) []byte {
			le.PutUint32(b[len(b)-4-33-4:], 1<<30) // before the empty calibration and guard state, the flag (17 bytes) and the flag count
			return b
		}, FaultTruncated},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Decode(reseal(tc.edit(bytes.Clone(base))))
			var ce *CorruptError
			if !errors.As(err, &ce) || ce.Fault != tc.fault {
				t.Fatalf("error %v, want fault %v", err, tc.fault)
			}
		})
	}
}

// A record claiming huge lengths (with a valid checksum) is refused before
// anything is allocated for them.
func TestDecodeAllocationBounded(t *testing.T) {
	base := Encode(nil, &series.Snapshot{Topic: "x", Window: []float64{1}})
	windowCount := headerLen + 4 + 1 + 4 + 8 + 4 + 8 + 1 + 8 + 8 + 8 + 8 + 1 + 8 + 8
	bad := bytes.Clone(base)
	le.PutUint32(bad[windowCount:], math.MaxUint32)
	reseal(bad)

	r := rand.New(rand.NewPCG(9, 10))
	good := Encode(nil, randomSnapshot(r, 2000))

	for _, tc := range []struct {
		name string
		b    []byte
	}{{"hostile count", bad}, {"full record", good}} {
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		for range 10 {
			_, _ = Decode(tc.b)
		}
		runtime.ReadMemStats(&after)
		perCall := (after.TotalAlloc - before.TotalAlloc) / 10
		// The snapshot, model and error structs are a few hundred bytes; the
		// rest must be paid for by the input: at most 2 bytes of output per
		// input byte (an alert's 21 input bytes decode into a 48-byte value).
		limit := uint64(2*len(tc.b) + 1024)
		if perCall > limit {
			t.Errorf("%s: Decode of %d bytes allocated %d bytes per call, limit %d", tc.name, len(tc.b), perCall, limit)
		}
	}
}

func TestEncodeDoesNotAllocate(t *testing.T) {
	r := rand.New(rand.NewPCG(11, 12))
	s := randomSnapshot(r, 2000)
	buf := make([]byte, 0, EncodedLen(s))
	allocs := testing.AllocsPerRun(100, func() { buf = Encode(buf[:0], s) })
	if allocs != 0 {
		t.Fatalf("Encode with capacity allocated %v times per call", allocs)
	}
}

func FuzzDecode(f *testing.F) {
	r := rand.New(rand.NewPCG(13, 14))
	for range 6 {
		f.Add(Encode(nil, randomSnapshot(r, 20)))
	}
	f.Add(Encode(nil, &series.Snapshot{}))
	f.Add([]byte{})
	f.Add([]byte("fwsr"))
	f.Add([]byte("fwsr\x01\x00\x0e\x00\x00\x00\x00\x00\x00\x00"))
	f.Fuzz(func(t *testing.T, b []byte) {
		s, err := Decode(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) && !errors.Is(err, ErrVersion) {
				t.Fatalf("error %v is neither ErrCorrupt nor ErrVersion", err)
			}
			if s != nil {
				t.Fatal("non-nil snapshot with an error")
			}
			return
		}
		checkReencode(t, b, s)
	})
}

// checkReencode: the encoding is canonical, so a record of the current
// version re-encodes to the same bytes; an older record re-encodes as the
// current version, to a record that decodes to the same snapshot.
func checkReencode(t *testing.T, b []byte, s *series.Snapshot) {
	t.Helper()
	again := Encode(nil, s)
	if le.Uint16(b[4:6]) == FormatVersion {
		if !bytes.Equal(again, b) {
			t.Fatalf("decoded record re-encodes differently (%d vs %d bytes)", len(again), len(b))
		}
		return
	}
	s2, err := Decode(again)
	if err != nil {
		t.Fatalf("an older record re-encoded as version %d does not decode: %v", FormatVersion, err)
	}
	if d := diff(s, s2); d != "" {
		t.Fatalf("an older record re-encoded as version %d decodes differently at %s", FormatVersion, d)
	}
}

// FuzzDecodePayload fuzzes the fields behind the checksum: each input is
// given a valid envelope (magic, version 1 or the current one, length,
// CRC-32C) before it is decoded, so the mutations reach the field decoder
// instead of stopping at the checksum. The seeds are payloads of the
// current version and of the committed version-1 records.
func FuzzDecodePayload(f *testing.F) {
	r := rand.New(rand.NewPCG(17, 18))
	for range 6 {
		rec := Encode(nil, randomSnapshot(r, 20))
		f.Add(false, rec[headerLen:len(rec)-crcLen])
	}
	for _, c := range fixtureCases() {
		if rec, err := os.ReadFile(v1Path(c.name)); err == nil {
			f.Add(true, rec[headerLen:len(rec)-crcLen])
		}
	}
	f.Add(false, []byte{})
	f.Fuzz(func(t *testing.T, v1 bool, payload []byte) {
		version := FormatVersion
		if v1 {
			version = 1
		}
		b := make([]byte, 0, envelopeLen+len(payload))
		b = append(b, magic[:]...)
		b = le.AppendUint16(b, version)
		b = le.AppendUint32(b, 0)
		b = append(b, payload...)
		b = reseal(append(b, 0, 0, 0, 0))
		s, err := Decode(b)
		if err != nil {
			var ce *CorruptError
			if !errors.As(err, &ce) || (ce.Fault != FaultTruncated && ce.Fault != FaultField) {
				t.Fatalf("error behind a valid envelope: %v, want a truncated or bad field fault", err)
			}
			return
		}
		checkReencode(t, b, s)
	})
}

// window2000 is the benchmark record: a 2000-bucket window, a seasonal
// model with a 26-element filter state, two alert rules.
func window2000() *series.Snapshot {
	r := rand.New(rand.NewPCG(15, 16))
	s := randomSnapshot(r, 0)
	s.Window = make([]float64, 2000)
	for i := range s.Window {
		s.Window[i] = 1000 + 10*r.NormFloat64()
	}
	s.Model = &series.ModelSnapshot{Order: [3]int{1, 1, 1}, Seasonal: [3]int{0, 1, 1}, Period: 24, Params: []float64{0.4, -0.3, -0.6}, Filter: make([]float64, 26)}
	s.Alerts = []series.AlertSnapshot{{Rule: "disk-nearly-full"}, {Rule: "orders-dropping"}}
	return s
}

func BenchmarkEncode(b *testing.B) {
	s := window2000()
	buf := make([]byte, 0, EncodedLen(s))
	b.SetBytes(int64(EncodedLen(s)))
	b.ReportAllocs()
	for b.Loop() {
		buf = Encode(buf[:0], s)
	}
}

func BenchmarkDecode(b *testing.B) {
	rec := Encode(nil, window2000())
	b.SetBytes(int64(len(rec)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Decode(rec); err != nil {
			b.Fatal(err)
		}
	}
}
