// Package state persists the per-series state of the forewarn daemon in a
// bbolt file, so that every series resumes after a restart, on this
// machine or another one, exactly where it stopped, without a refit.
//
// # What it owns
//
// The file <dir>/forewarn.db (mode 0600, directory 0700) with two buckets,
// and a third once a record has been set aside:
//
//	series     topic bytes → one record (below), the encoding of a series.Snapshot
//	meta       "format"  → uint16 little-endian, StoreVersion of the layout
//	           "created" → RFC 3339 time (UTC) at which the file was created
//	set-aside  topic bytes, 0x00, uint64 big-endian Unix nanoseconds →
//	           a record exactly as it was found in series (Store.SetAside)
//
// state persists and never computes: it knows nothing of models or
// transforms beyond the plain fields of series.Snapshot, except that it
// reads the model spelling of version-1 records (arima.ParseLegacySpec) to
// migrate them. Package engine never imports state.
//
// # Concurrency
//
// A Store is safe for concurrent use by multiple goroutines. bbolt allows
// one writer and many readers at a time within a process; Save and Delete
// are serialised, Load, LoadAll, Check and Info run alongside them. Across
// processes the file is locked: a writable Open takes it exclusively, so a
// second daemon, or the CLI while a daemon runs, gets ErrLocked after the
// lock timeout (1 s by default). Read-only opens share the file.
//
// # Durability
//
// Save commits a whole batch in one transaction, fsynced on commit (bbolt's
// default; NoSync exists for tests only). The daemon calls it once per
// flush, never once per message. After a crash the file holds the last
// committed batch entirely, and nothing of a batch that did not commit.
//
// # Record layout, format versions 1 to 4
//
// A record is self-contained: it can be copied to another machine, or
// another file, unchanged. All integers are little-endian; int and int64
// fields are written as their 64-bit two's complement; float64 values are
// their IEEE 754 bits (math.Float64bits), so NaN payloads, infinities and
// signed zeros survive bit for bit. A string is a uint32 byte count and the
// bytes; a float slice is a uint32 element count and 8 bytes per element
// (nil and empty slices are written alike and decode as nil); a bool is one
// byte, 0 or 1 (anything else is corrupt).
//
// The envelope, the same in every version:
//
//	offset  size  field
//	0       4     magic "fwsr" (0x66 0x77 0x73 0x72)
//	4       2     format version, uint16
//	6       4     record length in bytes, uint32, envelope included
//	10      ...   payload of that version
//	len-4   4     CRC-32C (Castagnoli) of bytes [0, len-4)
//
// The payload of version 4 (written since several seasonal cycles, the
// online spike and level-shift check and refit-time outliers, issue 12) is
// that of version 3 with four more model fields after Filter:
//
//	NX               int64: regression columns (the last NX Params are β)
//	column sets      uint32 count, then per set, in β's order:
//	  Kind           byte: 1 Fourier pairs of cycles, 2 outlier effects,
//	                 3 seasonal profiles of cycles (series.SetFourier,
//	                 SetEffects, SetProfile; a new regressor kind is a new
//	                 byte)
//	  Values         float slice: Fourier: the step in seconds, then per
//	                 cycle its length in seconds and its pairs K; effects:
//	                 δ of a temporary change, then per effect its kind
//	                 (0 AO, 1 LS, 2 TC) and bucket index; profile: per
//	                 cycle its length in seconds, its number of samples M
//	                 and the M samples of its shape (sample k at phase k/M)
//	cycles           uint32 count, then per cycle of the settings:
//	  Seconds        float64
//	  Terms          string: "arima", "fourier", "profile" or "none"
//	  K              int64: Fourier pairs
//	outliers         uint32 count, then per effect found at the refit:
//	  Kind           byte (0 AO, 1 LS, 2 TC)
//	  Bucket         int64
//	  Size           float64 (model scale)
//	  Tau            float64 (t value in the joint fit)
//	SearchedTo       int64: the bucket the refit's outlier search covered
//	                 to (its FittedAt; 0: no search), where the next one
//	                 resumes
//
// and, after Calibration:
//
//	Guard              float slice: the online check's state
//	                   (arima.Filter.AppendGuardState: on, last verdict and
//	                   z, the open run with its values and the filter's
//	                   state at its start, the learning of a shift's size);
//	                   empty when the check is off
//	Flag.Bucket        int64: the latest bucket the check took as an
//	Flag.Verdict       byte:  additive outlier (1) or level shift (2); 0 none
//	Flag.Z             float64: its standardised one-step error
//	Flags              uint64: buckets the check has flagged
//
// Records of versions 1 to 3 decode with none of these (no regressors, no
// cycles, no outliers, no check state: a restored series with the check on
// starts it afresh). state/testdata holds real version-3 records of two
// calibrated fits (written by the version-3 code);
// TestDecodeVersion3Records loads them.
//
// The payload of version 3 (written since the calibrated bands of CONTRACT
// §4) is that of version 2 below followed by one field:
//
//	Calibration        float slice: the calibrator's fixed state
//	                   (calibrate.Calibrator.AppendState: version, H, L,
//	                   buckets observed, updates, η, B, memory weight, the
//	                   levels, the thresholds H×L horizon-major, the
//	                   coverage sums 2L); empty when the series does not
//	                   calibrate
//
// At the default horizon 60 with two levels it is 134 values: 4 + 1 072
// bytes more per series. A version-2 record decodes with no calibration;
// the restored series then warms its calibrator from the window, as a fit
// does. state/testdata holds real version-2 records (written by the
// version-2 code); TestDecodeVersion2Records loads them.
//
// The payload of version 2 (written since the model vocabulary of CONTRACT
// revision 2), field by field, in order (series.Snapshot):
//
//	Topic              string
//	Fingerprint        string
//	Seq                uint64
//	SeqApplied         uint32
//	Kind               string
//	StepSeconds        int64
//	HasOpen            bool
//	OpenBucket         int64
//	OpenValue          float64
//	CounterOffset      float64
//	CounterLastRaw     float64
//	CounterHasRaw      bool
//	CounterResets      uint64
//	WindowEnd          int64
//	Window             float slice
//	Closed             uint64
//	SinceRefit         int64
//	Late               uint64
//	Transform.Name     string
//	Transform.Lambda   float64
//	Transform.Loc      float64
//	Transform.Scale    float64
//	Transform.RunN     int64
//	Transform.RunMean  float64
//	Transform.RunM2    float64
//	model presence     byte: 0 no model (nothing follows for it), 1 model:
//	  Order            3 × int64: p, d, q
//	  Seasonal         3 × int64: P, D, Q
//	  Period           int64: s, 0 without a seasonal part
//	  Mean             bool
//	  Drift            bool
//	  Params           float slice
//	  Sigma2           float64
//	  LogLik           float64
//	  AICc             float64
//	  NObs             int64
//	  FittedAt         int64
//	  Filter           float slice
//	RefitFailures      uint64
//	LastRefitNote      string
//	alert count        uint32, then per alert:
//	  Rule             string
//	  Raised           bool
//	  Since            int64
//	  Probability      float64
//
// A 2000-bucket window makes a record of about 16 KB.
//
// The payload of version 1 is that of version 2 except for the model's
// shape: in place of Order, Seasonal and Period it has one string, Spec,
// the model in forewarn's first spelling, "ARIMA(p,d,q)" or
// "ARIMA(p,d,q)(P,D,Q)[s]" with an optional suffix " with drift" or
// " with zero mean". Decode migrates it: arima.ParseLegacySpec gives the
// orders and the period; Mean and Drift are read from their own fields as
// in version 2. A Spec that does not parse is a bad field. A version-1
// record encodes again as version 2 (no record holds a rendered label any
// more). state/testdata holds real version-1 records of two fitted series,
// written by the version-1 code (TestWriteRecordFixtures -write-records);
// TestDecodeVersion1Records loads them.
//
// # Decoding
//
// Decode checks the magic, the declared length against the bytes present
// (shorter: truncated; longer: bad length), the CRC-32C, then the version,
// then each field against the bytes that remain before allocating for it.
// Damage gives a *CorruptError (errors.Is ErrCorrupt) naming the fault
// (bad magic, truncated, bad length, CRC mismatch, bad field) and the byte
// offset; a version this build does not read gives a *VersionError
// (errors.Is ErrVersion) carrying the version found. Hostile bytes never
// panic, and a decode allocates at most a small multiple of the input size.
//
// # Evolving the format
//
// The envelope never changes, so any build can tell a damaged record from
// a newer one. A change to the payload (a field added, removed, widened or
// reordered) takes a new format version: FormatVersion is raised, Encode
// writes only the newest version, and the decoder of every older version
// stays in Decode's switch, mapping the old fields onto series.Snapshot
// (a field the old version lacks gets its documented default). A record of
// a version above FormatVersion is refused with ErrVersion, never guessed
// at. Each version's layout stays documented here. The store layout (the
// buckets and meta keys) has its own StoreVersion under the same rule,
// except for a bucket that a build without it can ignore without misreading
// anything: set-aside came that way, in StoreVersion 1, and a build that
// does not know it leaves it alone.
//
// # Caveats
//
// A record damaged on disk affects only its own topic: LoadAll hands its
// error to the caller for that topic and loads the others, and the daemon
// sets that record aside and resets that one series. Nothing in this
// package deletes a set-aside record; `forewarn state check` lists them.
// Save keeps its encode chunks between calls, so its memory stays at the
// size of the largest batch (about 16 KB per series with a 2000-bucket
// window).
package state
