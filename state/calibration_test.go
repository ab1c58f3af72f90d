package state

import (
	"math"
	"math/rand/v2"
	"os"
	"testing"
	"time"

	"forewarn/engine/calibrate"
	"forewarn/engine/series"
)

// TestDecodeVersion2Records loads the committed version-2 records (written
// by the version-2 code before the calibration field existed): they decode
// with no calibration, restore to the fitted model, and a series that
// calibrates warms its calibrator from the restored window. Encoded again
// they are version 3 and decode to the same snapshot.
func TestDecodeVersion2Records(t *testing.T) {
	for _, c := range fixtureCases() {
		t.Run(c.name, func(t *testing.T) {
			p := fixturePath(2, c.name)
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			if v := le.Uint16(b[4:6]); v != 2 {
				t.Fatalf("%s holds a version-%d record", p, v)
			}
			snap, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			if snap.Model == nil || snap.Calibration != nil {
				t.Fatalf("model %v, calibration %v; want a model and no calibration", snap.Model, snap.Calibration)
			}
			fresh := fittedSeries(t, c).Forecast()
			for _, cal := range []bool{false, true} {
				set := c.set
				set.Calibrate = cal
				s, err := series.Restore(snap, set)
				if err != nil {
					t.Fatal(err)
				}
				got := s.Forecast()
				for h := range got.Points {
					if a, f := got.Points[h].Mean, fresh.Points[h].Mean; math.Abs(a-f) > 1e-6*math.Abs(f) {
						t.Errorf("calibrate %v h=%d: restored mean %v, fitted now %v", cal, h+1, a, f)
					}
				}
				if got.Calibrated != cal || (s.Calibrator() != nil) != cal {
					t.Errorf("calibrate %v: forecast calibrated %v", cal, got.Calibrated)
				}
				if cal {
					moved := false
					for _, p := range got.Points {
						for _, k := range p.Scale {
							moved = moved || math.Abs(k-1) > 1e-9
						}
					}
					if !moved {
						t.Error("every scale is 1: the calibrator was not warmed from the window")
					}
				}
			}
			again := Encode(nil, snap)
			if le.Uint16(again[4:6]) != FormatVersion {
				t.Errorf("re-encoded as version %d", le.Uint16(again[4:6]))
			}
			back, err := Decode(again)
			if err != nil {
				t.Fatal(err)
			}
			if d := diff(snap, back); d != "" {
				t.Errorf("re-encoded record differs at %s", d)
			}
		})
	}
}

// A restart through the record continues the calibrator: right after the
// restore every threshold, the coverage and the update count are those of
// the series that ran on; 400 buckets later no threshold differs by more
// than (h + 1)·η, the bound for the at most h updates of horizon h whose
// forecasts were pending at the restart (engine/calibrate doc; each later
// update moves two trackers' difference towards 0 or within η of it,
// since a miss is monotone in the threshold: common practice). Seeded AR(1)
// with t(3) innovations.
func TestRestartContinuesCalibrator(t *testing.T) {
	set := series.Settings{Kind: "gauge", StepSeconds: 60, Horizon: 12, Levels: []float64{50, 90},
		Window: 300, MinPoints: 200, RefitEvery: 100000, Model: "1,0,0", Transform: "none",
		Calibrate: true, Fingerprint: "restart"}
	r := rand.New(rand.NewPCG(5, 6))
	y := make([]float64, 1000)
	x := 50.0
	for i := range y {
		x = 50 + 0.7*(x-50) + r.NormFloat64()*(1+math.Abs(r.NormFloat64())) // heavier tails than normal
		y[i] = x
	}
	feed := func(s *series.Series, from, to int) {
		for i := from; i < to; i++ {
			o, err := s.Observe(int64(i)*60*int64(time.Second), y[i])
			if err != nil {
				t.Fatal(err)
			}
			if o == series.NeedFit {
				if _, err := s.Install(s.FitJob().Run()); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	a, err := series.New("restart", set)
	if err != nil {
		t.Fatal(err)
	}
	feed(a, 0, 600)
	rec := Encode(nil, a.Snapshot())
	if len(a.Snapshot().Calibration) != a.Calibrator().StateLen() {
		t.Fatalf("record holds %d calibration values, want %d", len(a.Snapshot().Calibration), a.Calibrator().StateLen())
	}
	snap, err := Decode(rec)
	if err != nil {
		t.Fatal(err)
	}
	b, err := series.Restore(snap, set)
	if err != nil {
		t.Fatal(err)
	}
	ca, cb := a.Calibrator(), b.Calibrator()
	same := func(what string, tol func(h int) float64) {
		for h := 1; h <= set.Horizon; h++ {
			for l := range set.Levels {
				if d := math.Abs(ca.Threshold(h, l) - cb.Threshold(h, l)); d > tol(h) {
					t.Errorf("%s: threshold h=%d level %v: %v after the restart, %v without (|Δ| %v > %v)",
						what, h, set.Levels[l], cb.Threshold(h, l), ca.Threshold(h, l), d, tol(h))
				}
			}
		}
	}
	same("at the restart", func(int) float64 { return 0 })
	for l := range set.Levels {
		sa, wa := ca.Coverage(l)
		sb, wb := cb.Coverage(l)
		if sa != sb || wa != wb || ca.Updates() != cb.Updates() {
			t.Errorf("level %v: coverage %v (%v), updates %d after the restart; %v (%v), %d without", set.Levels[l], sb, wb, cb.Updates(), sa, wa, ca.Updates())
		}
	}
	if ca.Updates() == 0 {
		t.Fatal("no update before the restart")
	}
	feed(a, 600, 1000)
	feed(b, 600, 1000)
	same("400 buckets later", func(h int) float64 { return float64(h+1)*calibrate.DefaultRate + 1e-12 })
	if ca.Updates()-cb.Updates() > uint64(set.Horizon*(set.Horizon+1)/2*len(set.Levels)) {
		t.Errorf("updates %d after the restart, %d without", cb.Updates(), ca.Updates())
	}
}
