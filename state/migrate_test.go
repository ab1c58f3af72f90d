package state

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"testing"
	"time"

	"forewarn/engine/series"
)

// TestDecodeVersion3Records loads the committed version-3 records (written
// by the version-3 code with calibration on, before format 4 added the
// cycles, the regression design, the guard and the outliers): they decode
// with the calibrator's state and no format-4 part, restore to the fitted
// model with its calibration continued, and forecast as the same model
// fitted now by the current code (to 1e-6 relative). Encoded again they
// are of the current version and decode to the same snapshot.
func TestDecodeVersion3Records(t *testing.T) {
	for _, c := range fixtureCases() {
		t.Run(c.name, func(t *testing.T) {
			p := fixturePath(3, c.name)
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			if v := le.Uint16(b[4:6]); v != 3 {
				t.Fatalf("%s holds a version-%d record", p, v)
			}
			snap, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			if snap.Model == nil || len(snap.Calibration) == 0 {
				t.Fatalf("model %v, %d calibration values; want a model and a calibrator", snap.Model, len(snap.Calibration))
			}
			set := c.set
			set.Calibrate = true
			// a record of format 3 has no check state: with the check on
			// (the daemon's default) it starts afresh
			guarded := set
			guarded.Guard, guarded.Outliers = true, true
			g, err := series.Restore(snap, guarded)
			if err != nil {
				t.Fatalf("restored with the check on: %v", err)
			}
			if gs := g.Snapshot(); len(gs.Guard) == 0 || gs.Guard[0] != 1 {
				t.Errorf("restored with the check on: guard state %v", gs.Guard)
			}
			s, err := series.Restore(snap, set)
			if err != nil {
				t.Fatal(err)
			}
			if !s.HasModel() {
				t.Fatal("the restored series dropped its model")
			}
			if got, want := len(snap.Calibration), s.Calibrator().StateLen(); got != want {
				t.Fatalf("%d calibration values, the calibrator holds %d", got, want)
			}
			fresh := fittedSeries(t, c).Forecast()
			got := s.Forecast()
			if !got.Calibrated {
				t.Error("the restored forecast is not calibrated")
			}
			gf := g.Forecast()
			for h := range got.Points {
				if a, f := got.Points[h].Mean, fresh.Points[h].Mean; math.Abs(a-f) > 1e-6*math.Abs(f) {
					t.Errorf("h=%d: restored mean %v, fitted now %v", h+1, a, f)
				}
				if gf.Points[h].Mean != got.Points[h].Mean {
					t.Errorf("h=%d: restored with the check on %v, without %v", h+1, gf.Points[h].Mean, got.Points[h].Mean)
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

// A series with a seasonal cycle given as Fourier pairs, the online check
// and refit-time outliers, saved as a record (Encode, Decode) at points
// inside a check's run, right after a flag and between refits, continues
// bit for bit as the uninterrupted one: the record carries the cycles, the
// regression design, β, the filter and the check's state.
func TestRecordRestartExactWithCyclesGuardOutliers(t *testing.T) {
	const step, cycle, from = 60, 5430.0, 29_000_017 // a cycle of 90.5 one-minute steps
	r := rand.New(rand.NewPCG(5, 99))
	y := make([]float64, 520)
	u := 0.0
	for i := range y {
		ph := math.Mod(float64((from+int64(i))*step), cycle) / cycle
		u = 0.5*u + r.NormFloat64()
		y[i] = 100 + 6*math.Sin(2*math.Pi*ph) + 3*math.Cos(4*math.Pi*ph) + u
	}
	y[150] += 12 // a spike inside the first fit's window
	y[331] += 15 // one seen by the check
	for i := 360; i < len(y); i++ {
		y[i] += 6 // a level shift
	}
	set := series.Settings{Kind: "gauge", StepSeconds: step, Horizon: 30, Levels: []float64{80, 95},
		Window: 600, MinPoints: 300, RefitEvery: 70, Model: "auto", Transform: "none",
		Seasons: []float64{cycle}, Guard: true, Outliers: true, Fingerprint: "cycles"} // calibration off: its pending forecasts are not in the record (series.Snapshot)
	restartExact(t, set, y, from, []int{332, 362, 371, 441}, 362, func(m *series.ModelSnapshot) string {
		if m.NX == 0 || len(m.Cycles) != 1 || len(m.Outliers) == 0 || len(m.Design) != 2 {
			return fmt.Sprintf("last model: %d regressors, cycles %+v, outliers %+v, %d column sets; want Fourier pairs and outliers", m.NX, m.Cycles, m.Outliers, len(m.Design))
		}
		return ""
	})
}

// The same with two cycles carried by the profile route (auto.Select's
// holdout picks it on these cornered seasonal shapes): the record's
// profile column set (kind 3: cycles and shapes) with the refit-time
// outlier effects after it, the check's state, and warm refits that keep
// the route; a restart continues bit for bit.
func TestRecordRestartExactWithProfileGuardOutliers(t *testing.T) {
	const step, from = 60, 29_000_017
	const short, long = 24 * step, 168 * step
	r := rand.New(rand.NewPCG(11, 7))
	y := make([]float64, 1000)
	u := 0.0
	for i := range y {
		tt := float64((from + int64(i)) * step)
		m := 50 + 6*math.Mod(tt, short)/short
		if math.Mod(tt, long)/long < 40.0/168 {
			m -= 8
		}
		u = 0.6*u + 0.5*r.NormFloat64()
		y[i] = m + u
	}
	y[500] += 8 // a spike inside the first fit's window
	y[850] += 9 // one seen by the check
	for i := 900; i < len(y); i++ {
		y[i] += 4 // a level shift
	}
	set := series.Settings{Kind: "gauge", StepSeconds: step, Horizon: 30, Levels: []float64{80, 95},
		Window: 800, MinPoints: 800, RefitEvery: 60, Model: "auto", Transform: "none",
		Seasons: []float64{short, long}, Guard: true, Outliers: true, Fingerprint: "profile"}
	restartExact(t, set, y, from, []int{851, 902, 905, 961}, 902, func(m *series.ModelSnapshot) string {
		if len(m.Design) != 2 || m.Design[0].Kind != series.SetProfile || m.Design[1].Kind != series.SetEffects || len(m.Outliers) == 0 {
			return fmt.Sprintf("last model: design %+v, outliers %+v; want the profile column set, then outlier effects", m.Design, m.Outliers)
		}
		for _, c := range m.Cycles {
			if c.Terms != "profile" {
				return fmt.Sprintf("cycles %+v: want the profile route kept at the warm refits", m.Cycles)
			}
		}
		return ""
	})
}

// restartExact drives y (one value a bucket from bucket from) through a
// series of the settings, once whole and, for each cut, up to the cut,
// through Encode and Decode (a format-4 record) and Restore, then on: the
// forecasts must be equal bit for bit. check looks at the whole run's
// last model ("" when it is what the test needs). The record cut at
// runCut must hold an open run of the check.
func restartExact(t *testing.T, set series.Settings, y []float64, from int64, cuts []int, runCut int, check func(*series.ModelSnapshot) string) {
	t.Helper()
	step := set.StepSeconds
	drive := func(s *series.Series, from0, to int) []series.Forecast {
		var out []series.Forecast
		for i := from0; i < to; i++ {
			o, err := s.Observe((from+int64(i))*step*int64(time.Second), y[i])
			if err != nil {
				t.Fatal(err)
			}
			if o == series.NeedFit {
				if o, err = s.Install(s.FitJob().Run()); err != nil {
					t.Fatal(err)
				}
			}
			if o == series.Published {
				f := *s.Forecast()
				f.Points = slices.Clone(f.Points)
				for k := range f.Points {
					p := &f.Points[k]
					p.Lower, p.Upper, p.Scale = slices.Clone(p.Lower), slices.Clone(p.Upper), slices.Clone(p.Scale)
				}
				out = append(out, f)
			}
		}
		return out
	}
	whole, err := series.New("x", set)
	if err != nil {
		t.Fatal(err)
	}
	want := drive(whole, 0, len(y))
	if msg := check(whole.Snapshot().Model); msg != "" {
		t.Fatal(msg)
	}
	for _, cut := range cuts {
		first, _ := series.New("x", set)
		a := drive(first, 0, cut)
		rec := Encode(nil, first.Snapshot())
		if le.Uint16(rec[4:6]) != 4 {
			t.Fatalf("record of version %d", le.Uint16(rec[4:6]))
		}
		snap, err := Decode(rec)
		if err != nil {
			t.Fatal(err)
		}
		if cut == runCut && (len(snap.Guard) == 0 || snap.Guard[3] == 0) {
			t.Errorf("cut %d: no open run in the record's guard state %v", cut, snap.Guard)
		}
		second, err := series.Restore(snap, set)
		if err != nil {
			t.Fatal(err)
		}
		got := append(a, drive(second, cut, len(y))...)
		if len(got) != len(want) {
			t.Fatalf("cut %d: %d forecasts, want %d", cut, len(got), len(want))
		}
		for i := range got {
			if d := diff(got[i], want[i]); d != "" {
				t.Fatalf("cut %d: forecast %d (origin %v) differs from the uninterrupted run at %s", cut, i, got[i].Origin, d)
			}
		}
	}
}
