package config

import (
	"crypto/sha256"
	"encoding/hex"
	"os"
	"strings"
	"testing"
	"time"
)

// The default entry's fingerprint equals the SHA-256 that GNU coreutils
// sha256sum computes of the documented canonical encoding
// (testdata/fingerprint.sh wrote testdata/fingerprint-default.txt).
func TestFingerprintPinned(t *testing.T) {
	raw, err := os.ReadFile("testdata/fingerprint-default.txt")
	if err != nil {
		t.Fatal(err)
	}
	want, _, _ := strings.Cut(string(raw), "\n")
	s := DefaultSeries()
	if got := s.Fingerprint(); got != want {
		t.Errorf("Fingerprint(DefaultSeries()) = %s, sha256sum gave %s", got, want)
	}
}

func TestFingerprintSameSettings(t *testing.T) {
	base := DefaultSeries()
	fp := base.Fingerprint()
	same := []Series{
		{}, // zero fields mean the defaults
		{Match: "shop.>", Line: 12, Kind: "gauge", Step: time.Minute},
		{Levels: []float64{90, 50}},
		{Model: "auto", Transform: "auto", Horizon: 60, Constant: "auto"},
		{Levels: []float64{90, 50}, Constant: " auto "},
		{Calibrate: new(true)}, // calibrate: true is the default
	}
	for _, s := range same {
		if got := s.Fingerprint(); got != fp {
			t.Errorf("%+v: fingerprint %s differs from the default entry's %s", s, got, fp)
		}
	}
	if s := DefaultSeries(); s.Fingerprint() != base.Fingerprint() {
		t.Error("fingerprint differs between two calls")
	}
}

func TestFingerprintMathsChanges(t *testing.T) {
	def := DefaultSeries()
	fp := def.Fingerprint()
	changes := map[string]func(*Series){
		"kind":        func(s *Series) { s.Kind = "counter" },
		"step":        func(s *Series) { s.Step = 2 * time.Minute },
		"horizon":     func(s *Series) { s.Horizon = 61 },
		"levels":      func(s *Series) { s.Levels = []float64{80, 99} },
		"levels more": func(s *Series) { s.Levels = []float64{50, 80, 95} },
		"window":      func(s *Series) { s.Window = 1999 },
		"min_points":  func(s *Series) { s.MinPoints = 51 },
		"refit_every": func(s *Series) { s.RefitEvery = 59 },
		"model":       func(s *Series) { s.Model = "1,1,1" },
		"seasons":     func(s *Series) { s.Seasons = []Cycle{{Steps: 24}} },
		"calibrate":   func(s *Series) { s.Calibrate = new(false) },
		"constant":    func(s *Series) { s.Constant = "none" },
		"transform":   func(s *Series) { s.Transform = "log" },
		"close_after": func(s *Series) { s.CloseAfter = time.Second },
	}
	seen := map[string]string{fp: "default"}
	for name, change := range changes {
		s := DefaultSeries()
		change(&s)
		got := s.Fingerprint()
		if prev, dup := seen[got]; dup {
			t.Errorf("changing %s gives the same fingerprint as %s", name, prev)
		}
		seen[got] = name
	}
}

// A cycle enters the fingerprint as its number of steps, on the line the
// former key period wrote, so that a series configured with period: 24
// keeps its fingerprint (and its model) under seasons: [24] or [1d]; fixed
// orders enter in the form WithDefaults writes. The expected value is the
// SHA-256 (NIST FIPS 180-4) of the canonical encoding as the doc comment
// of Fingerprint spells it.
func TestFingerprintSeasonsAndOrders(t *testing.T) {
	enc := func(extra, model string) string {
		sum := sha256.Sum256([]byte("forewarn-series-v1\nkind=gauge\nstep=3600000000000\nhorizon=60\nlevels=50,90\n" +
			"window=2000\nmin_points=50\nrefit_every=60\n" + extra + "model=" + model + "\ntransform=auto\nclose_after=0\n"))
		return hex.EncodeToString(sum[:])
	}
	period24 := enc("period=24\n", "auto")
	for _, s := range []Series{
		{Step: time.Hour, Seasons: []Cycle{{Steps: 24}}},
		{Step: time.Hour, Seasons: []Cycle{{Length: Day}}},
	} {
		if got := s.Fingerprint(); got != period24 {
			t.Errorf("seasons %v: fingerprint %s, want that of period=24, %s", s.Seasons, got, period24)
		}
	}
	airline := enc("period=24\n", "0,1,1 x 0,1,1")
	for _, m := range []string{"0,1,1 x 0,1,1", " 0, 1, 1×0,1,1 ", "0,1,1x0,1,1"} {
		s := Series{Step: time.Hour, Seasons: []Cycle{{Length: Day}}, Model: m}
		if got := s.Fingerprint(); got != airline {
			t.Errorf("model %q: fingerprint %s, want %s", m, got, airline)
		}
	}
}

func BenchmarkFingerprint(b *testing.B) {
	s := DefaultSeries()
	b.ReportAllocs()
	for b.Loop() {
		_ = s.Fingerprint()
	}
}
