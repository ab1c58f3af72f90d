package state

import (
	"bufio"
	"flag"
	"fmt"
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
	air.MinPoints, air.Model, air.Fingerprint = 72, "ARIMA(0,1,1)(0,1,1)[12]", "fixture-usaccdeaths"
	drift.MinPoints, drift.Model, drift.Fingerprint = 89, "ARIMA(1,1,0) with drift", "fixture-austres"
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

func TestWriteRecordFixtures(t *testing.T) {
	if !*writeRecords {
		t.Skip("writes testdata; run with -write-records")
	}
	for _, c := range fixtureCases() {
		s := fittedSeries(t, c)
		p := filepath.Join("testdata", fmt.Sprintf("record_v%d_%s.bin", FormatVersion, c.name))
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, Encode(nil, s.Snapshot()), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("wrote %s", p)
	}
}
