package state

import (
	"bufio"
	"bytes"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"forewarn/engine/series"
)

// writeRecords makes TestWriteRecordFixtures write the committed record
// files. Run it (go test ./state/ -run TestWriteRecordFixtures
// -write-records) with the code of a format version, before that version is
// replaced, so that testdata keeps a real record of every older version
// for the decoder of the next one to prove it still reads them.
var writeRecords = flag.Bool("write-records", false, "write testdata/record_v<FormatVersion>_*.bin from fitted series")

// fixtureCase is one fitted series whose record is committed: a series of
// R's datasets package fitted with a fixed model, whose coefficients R
// 4.2.2 gives in testdata/r/arima_refs.json.
type fixtureCase struct {
	name    string // file name part and topic
	dataset string // testdata/datasets/<dataset>.csv
	set     series.Settings
}

// fixtureCases: the airline model of USAccDeaths (seasonal, no constant)
// and ARIMA(1,1,0) with a drift on austres, the two shapes of the model
// part a record holds.
func fixtureCases() []fixtureCase {
	base := series.Settings{Kind: "gauge", StepSeconds: 3600, Horizon: 6, Levels: []float64{80, 95},
		Window: 200, RefitEvery: 1000, Transform: "none"}
	air, drift := base, base
	air.MinPoints, air.Model, air.Period, air.Fingerprint = 72, "0,1,1 x 0,1,1", 12, "fixture-usaccdeaths"
	drift.MinPoints, drift.Model, drift.Constant, drift.Fingerprint = 89, "1,1,0", "drift", "fixture-austres"
	return []fixtureCase{
		{"usaccdeaths", "USAccDeaths", air},
		{"austres", "austres", drift},
	}
}

// readValues reads the last column of a CSV file with a header row.
func readValues(t testing.TB, path string) []float64 {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []float64
	sc := bufio.NewScanner(f)
	sc.Scan() // header
	for sc.Scan() {
		cells := strings.Split(sc.Text(), ",")
		v, err := strconv.ParseFloat(cells[len(cells)-1], 64)
		if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		out = append(out, v)
	}
	return out
}

// fittedSeries feeds the dataset to a new series, one value per step from
// 2001-01-01 UTC, closes the last bucket and runs the fit it asks for.
func fittedSeries(t testing.TB, c fixtureCase) *series.Series {
	t.Helper()
	y := readValues(t, filepath.Join("..", "testdata", "datasets", c.dataset+".csv"))
	s, err := series.New(c.name, c.set)
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2001, 1, 1, 0, 0, 0, 0, time.UTC).UnixNano()
	step := c.set.StepSeconds * int64(time.Second)
	fitted := false
	run := func(o series.Outcome, err error) {
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if o == series.NeedFit {
			if _, err := s.Install(s.FitJob().Run()); err != nil {
				t.Fatalf("%s: fit: %v", c.name, err)
			}
			fitted = true
		}
	}
	for i, v := range y {
		run(s.Observe(t0+int64(i)*step, v))
	}
	run(s.CloseOpen(), nil)
	if !fitted || !s.HasModel() {
		t.Fatalf("%s: no model after %d values", c.name, len(y))
	}
	return s
}

func fixturePath(version uint16, name string) string {
	return filepath.Join("testdata", fmt.Sprintf("record_v%d_%s.bin", version, name))
}

func v1Path(name string) string { return fixturePath(1, name) }

func TestWriteRecordFixtures(t *testing.T) {
	if !*writeRecords {
		t.Skip("writes testdata; run with -write-records")
	}
	for _, c := range fixtureCases() {
		c.set.Calibrate = true // a record of format 3 or later carries the calibrator's state
		s := fittedSeries(t, c)
		p := fixturePath(FormatVersion, c.name)
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, Encode(nil, s.Snapshot()), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", p)
	}
}

// TestDecodeVersion1Records loads the committed version-1 records, whose
// model is a spec string in the first spelling, and checks that the
// migration gives the model that was fitted: the orders, period and
// constant of the fit, R 4.2.2's coefficients (testdata/r/arima_refs.json,
// cases USAccDeaths_airline and austres_110_drift; tolerance 0.01 as in
// the arima package), and, once restored, the forecasts of the same model
// fitted now by the current code (to 1e-6 relative) and R's first forecast
// (tolerance 2 % of R's standard error, as cmd/forewarn's fit tests).
func TestDecodeVersion1Records(t *testing.T) {
	for _, c := range []struct {
		name            string
		order, seasonal [3]int
		period          int
		mean, drift     bool
		label           string
		coef            []float64 // R 4.2.2
		nobs            int       // R 4.2.2
		forecast1, se1  float64   // R 4.2.2 predict, h = 1
		legacySpelling  string
	}{
		{"usaccdeaths", [3]int{0, 1, 1}, [3]int{0, 1, 1}, 12, false, false, "ARIMA 0,1,1 × 0,1,1 s=12",
			[]float64{-0.430278483358636, -0.5527720068699884}, 59, 8336.059911206808, 315.45, "ARIMA(0,1,1)(0,1,1)[12]"},
		{"austres", [3]int{1, 1, 0}, [3]int{}, 0, false, true, "ARIMA 1,1,0 + drift",
			[]float64{0.5924463455808375, 52.09737642636244}, 88, 17703.112630436197, 0, "ARIMA(1,1,0) with drift"},
	} {
		t.Run(c.name, func(t *testing.T) {
			b, err := os.ReadFile(v1Path(c.name))
			if err != nil {
				t.Fatal(err)
			}
			if v := le.Uint16(b[4:6]); v != 1 {
				t.Fatalf("%s holds a version-%d record", v1Path(c.name), v)
			}
			if !bytes.Contains(b, []byte(c.legacySpelling)) {
				t.Fatalf("%s does not hold the spelling %q", v1Path(c.name), c.legacySpelling)
			}
			snap, err := Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			m := snap.Model
			if m == nil {
				t.Fatal("no model")
			}
			if m.Order != c.order || m.Seasonal != c.seasonal || m.Period != c.period || m.Mean != c.mean || m.Drift != c.drift {
				t.Fatalf("model %v × %v s=%d mean %v drift %v; want %v × %v s=%d mean %v drift %v",
					m.Order, m.Seasonal, m.Period, m.Mean, m.Drift, c.order, c.seasonal, c.period, c.mean, c.drift)
			}
			if len(m.Params) != len(c.coef) || m.NObs != c.nobs {
				t.Fatalf("params %v nobs %d; R %v nobs %d", m.Params, m.NObs, c.coef, c.nobs)
			}
			for i := range c.coef {
				if math.Abs(m.Params[i]-c.coef[i]) > 0.01 {
					t.Errorf("param %d = %v, R 4.2.2 %v", i, m.Params[i], c.coef[i])
				}
			}

			var fc fixtureCase
			for _, f := range fixtureCases() {
				if f.name == c.name {
					fc = f
				}
			}
			restored, err := series.Restore(snap, fc.set)
			if err != nil {
				t.Fatal(err)
			}
			if !restored.HasModel() {
				t.Fatal("the restored series dropped its model")
			}
			got := restored.Forecast()
			if got.Model.Spec != c.label {
				t.Errorf("label %q, want %q", got.Model.Spec, c.label)
			}
			fresh := fittedSeries(t, fc).Forecast()
			if len(got.Points) != fc.set.Horizon || len(fresh.Points) != fc.set.Horizon {
				t.Fatalf("%d and %d forecast points, want %d", len(got.Points), len(fresh.Points), fc.set.Horizon)
			}
			for h := range got.Points {
				a, f := got.Points[h].Mean, fresh.Points[h].Mean
				if math.Abs(a-f) > 1e-6*math.Abs(f) {
					t.Errorf("h=%d: restored mean %v, fitted now %v", h+1, a, f)
				}
			}
			tol := 0.02 * c.se1
			if c.se1 == 0 {
				tol = 1e-4 * c.forecast1
			}
			if d := math.Abs(got.Points[0].Mean - c.forecast1); d > tol {
				t.Errorf("h=1 mean %v, R 4.2.2 %v", got.Points[0].Mean, c.forecast1)
			}

			// Encoded again, the record is of the current version and
			// holds no spelling of the model.
			again := Encode(nil, snap)
			if le.Uint16(again[4:6]) != FormatVersion || bytes.Contains(again, []byte("ARIMA")) {
				t.Errorf("re-encoded: version %d, spelling present %v", le.Uint16(again[4:6]), bytes.Contains(again, []byte("ARIMA")))
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

// A version-1 spec string that no version-1 encoder wrote is a bad field,
// reported at the offset of the string's length.
func TestDecodeVersion1BadSpec(t *testing.T) {
	b, err := os.ReadFile(v1Path("usaccdeaths"))
	if err != nil {
		t.Fatal(err)
	}
	spelling := []byte("ARIMA(0,1,1)(0,1,1)[12]")
	i := bytes.Index(b, spelling)
	if i < 4 {
		t.Fatalf("spelling not found")
	}
	bad := bytes.Clone(b)
	copy(bad[i:], "ARIMA(0,1,1)(0,1,1)[1]x")
	_, err = Decode(reseal(bad))
	var ce *CorruptError
	if !errors.As(err, &ce) || ce.Fault != FaultField || ce.Offset != i-4 || !strings.Contains(err.Error(), "model spec") {
		t.Fatalf("Decode: %v, want a bad field at offset %d naming the model spec", err, i-4)
	}
}
