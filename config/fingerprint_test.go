package config

import (
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
		{Levels: []float64{95, 80}},
		{Model: "auto", Transform: "auto", Horizon: 60},
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
		"model":       func(s *Series) { s.Model = "ARIMA(1,1,1)" },
		"period":      func(s *Series) { s.Period = 24 },
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

func BenchmarkFingerprint(b *testing.B) {
	s := DefaultSeries()
	b.ReportAllocs()
	for b.Loop() {
		_ = s.Fingerprint()
	}
}
