// Package webtest loads the open datasets and reference forecasts that
// the tests of the HTTP surface and the chart renderer draw: series of R
// 4.2.2's `datasets` package exported to testdata/datasets/*.csv, and R
// 4.2.2 predict.Arima forecasts in testdata/r/arima_refs.json, both
// written by testdata/r/arima_refs.R. It is imported by tests only.
package webtest

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

// Root is the repository root.
func Root() string {
	_, file, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(file), "..", "..", "..", "..")
}

// DecimalYear turns R's time(x) of a monthly or quarterly series (a
// decimal year) into the start of its month, in UTC.
func DecimalYear(y float64) time.Time {
	yr := math.Floor(y + 1e-9)
	m := int(math.Round((y - yr) * 12))
	return time.Date(int(yr), time.Month(1+m), 1, 0, 0, 0, 0, time.UTC)
}

// Dataset reads testdata/datasets/NAME.csv; NA is a missing value (NaN).
func Dataset(tb testing.TB, name string) ([]time.Time, []float64) {
	tb.Helper()
	f, err := os.Open(filepath.Join(Root(), "testdata", "datasets", name+".csv"))
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		tb.Fatal(err)
	}
	ts := make([]time.Time, 0, len(rows))
	vs := make([]float64, 0, len(rows))
	for _, r := range rows[1:] {
		y, err := strconv.ParseFloat(r[0], 64)
		if err != nil {
			tb.Fatal(err)
		}
		v := math.NaN()
		if r[1] != "NA" {
			if v, err = strconv.ParseFloat(r[1], 64); err != nil {
				tb.Fatal(err)
			}
		}
		ts = append(ts, DecimalYear(y))
		vs = append(vs, v)
	}
	return ts, vs
}

// Reference is a dataset with a reference forecast in raw units.
type Reference struct {
	Data   string // dataset name
	Times  []time.Time
	Values []float64
	Levels []float64

	// Forecast, h = 1…: Median[h-1], and Lower[h-1][i], Upper[h-1][i] for
	// Levels[i].
	ForecastTimes []time.Time
	Mean, Median  []float64
	SE            []float64 // on the model's scale
	Lower, Upper  [][]float64
}

// Forecast returns R 4.2.2 predict.Arima's forecast for case id of
// testdata/r/arima_refs.json on a monthly series. The median is g(f), g
// the inverse of the case's transform (none, log or log10); the bounds of
// the central level-% interval are g(f ± z·se), z the standard normal
// quantile, i.e. the model-scale interval mapped through g; the mean is
// reported as the median (the tests draw medians and bands only).
func Forecast(tb testing.TB, id string, levels []float64) *Reference {
	tb.Helper()
	b, err := os.ReadFile(filepath.Join(Root(), "testdata", "r", "arima_refs.json"))
	if err != nil {
		tb.Fatal(err)
	}
	var refs struct {
		Cases []struct {
			ID         string    `json:"id"`
			Data       string    `json:"data"`
			Transform  string    `json:"transform"`
			Forecast   []float64 `json:"forecast"`
			ForecastSE []float64 `json:"forecast_se"`
		}
	}
	if err := json.Unmarshal(b, &refs); err != nil {
		tb.Fatal(err)
	}
	for _, c := range refs.Cases {
		if c.ID != id {
			continue
		}
		inv := func(x float64) float64 { return x }
		switch c.Transform {
		case "log":
			inv = math.Exp
		case "log10":
			inv = func(x float64) float64 { return math.Pow(10, x) }
		}
		r := &Reference{Data: c.Data, Levels: levels, SE: c.ForecastSE}
		r.Times, r.Values = Dataset(tb, c.Data)
		last := r.Times[len(r.Times)-1]
		for h, f := range c.Forecast {
			r.ForecastTimes = append(r.ForecastTimes, last.AddDate(0, h+1, 0))
			r.Median = append(r.Median, inv(f))
			var lo, up []float64
			for _, l := range levels {
				z := distuv.UnitNormal.Quantile(0.5 + l/200)
				lo = append(lo, inv(f-z*c.ForecastSE[h]))
				up = append(up, inv(f+z*c.ForecastSE[h]))
			}
			r.Lower, r.Upper = append(r.Lower, lo), append(r.Upper, up)
		}
		r.Mean = r.Median
		return r
	}
	tb.Fatalf("webtest: no reference case %q", id)
	return nil
}
