package state

import (
	"math"
	"os"
	"testing"

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
			for h := range got.Points {
				if a, f := got.Points[h].Mean, fresh.Points[h].Mean; math.Abs(a-f) > 1e-6*math.Abs(f) {
					t.Errorf("h=%d: restored mean %v, fitted now %v", h+1, a, f)
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
