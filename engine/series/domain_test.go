package series

import (
	"errors"
	"math"
	"reflect"
	"testing"
)

// domainSettings are settings with the given transform: a random walk fits
// ARIMA(0,1,0) after 20 buckets.
func domainSettings(tr string) Settings {
	return Settings{
		Kind: "gauge", StepSeconds: 60, Horizon: 4, Levels: []float64{80}, Window: 100,
		MinPoints: 20, RefitEvery: 50, Model: "0,1,0", Transform: tr, Fingerprint: tr,
	}
}

// bucketNanos is the start of bucket b of domainSettings, in Unix ns.
func bucketNanos(b int64) int64 { return b * 60 * 1e9 }

// A transform the settings fix bounds what a series takes from its first
// observation: log and Box–Cox take only x > 0 (their domain, Box & Cox
// 1964), so 0 and negative values are rejected with ErrDomain while the
// series warms up, with the reason they get after the first fit, and the
// series is left unchanged. auto, none and scaled-exp take them.
func TestFixedTransformDomainDuringWarmup(t *testing.T) {
	for _, tc := range []struct {
		transform string
		reject    bool
		shown     string // the transform as the reason names it
	}{
		{"log", true, "log"},
		{"boxcox", true, "boxcox"},
		{"boxcox(0.5)", true, "boxcox(0.5)"},
		{"boxcox(0)", true, "boxcox(0)"},
		{"auto", false, ""},
		{"none", false, ""},
		{"scaled-exp", false, ""},
	} {
		s, err := New("disk.used", domainSettings(tc.transform))
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.Observe(bucketNanos(1), 5); err != nil {
			t.Fatalf("%s: positive value: %v", tc.transform, err)
		}
		before := s.Snapshot()
		for _, in := range []struct {
			v     float64
			shown string // as %g prints it
		}{{0, "0"}, {-3.5, "-3.5"}, {math.Copysign(0, -1), "-0"}} {
			v := in.v
			_, err := s.Observe(bucketNanos(2), v)
			if !tc.reject {
				if err != nil {
					t.Errorf("%s: value %g rejected: %v", tc.transform, v, err)
				}
				continue
			}
			if !errors.Is(err, ErrDomain) {
				t.Errorf("%s: value %g while warming up: err %v, want ErrDomain", tc.transform, v, err)
				continue
			}
			want := "series: value outside the transform's domain: value " + in.shown + " under transform " + tc.shown
			if err.Error() != want {
				t.Errorf("%s: reason %q, want %q", tc.transform, err, want)
			}
			if got := s.Snapshot(); !reflect.DeepEqual(got, before) {
				t.Errorf("%s: a rejected value changed the series:\n got %+v\nwant %+v", tc.transform, got, before)
			}
		}
	}
}

// The reason a warming-up series gives is the one the same series gives
// once fitted (under a fixed log the fitted transform is log too).
func TestDomainReasonSameBeforeAndAfterFirstFit(t *testing.T) {
	s, err := New("disk.used", domainSettings("log"))
	if err != nil {
		t.Fatal(err)
	}
	_, warm := s.Observe(bucketNanos(0), 0)
	if warm == nil {
		t.Fatal("0 accepted under log while warming up")
	}
	v := 100.0
	for b := int64(0); !s.HasModel(); b++ {
		if b > 50 {
			t.Fatal("no model after 50 buckets")
		}
		v *= 1 + 0.01*math.Sin(float64(b)) // positive, not constant
		out, err := s.Observe(bucketNanos(b), v)
		if err != nil {
			t.Fatalf("bucket %d: %v", b, err)
		}
		if out == NeedFit {
			if _, err := s.Install(s.FitJob().Run()); err != nil {
				t.Fatalf("first fit: %v", err)
			}
		}
	}
	_, fitted := s.Observe(bucketNanos(60), 0)
	if fitted == nil || fitted.Error() != warm.Error() {
		t.Errorf("after the first fit: %v; while warming up: %v", fitted, warm)
	}
}
