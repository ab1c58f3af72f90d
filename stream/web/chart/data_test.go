package chart

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

// root is the repository root, seen from this package.
var root = filepath.Join("..", "..", "..")

// decimalYear turns R's time(x) of a monthly or quarterly series (a
// decimal year) into the start of its month.
func decimalYear(y float64) time.Time {
	yr := math.Floor(y + 1e-9)
	m := int(math.Round((y - yr) * 12))
	return time.Date(int(yr), time.Month(1+m), 1, 0, 0, 0, 0, time.UTC)
}

// loadDataset reads testdata/datasets/NAME.csv (exported from R 4.2.2
// `datasets` by testdata/r/arima_refs.R); NA is a missing value.
func loadDataset(t testing.TB, name string) ([]time.Time, []float64) {
	t.Helper()
	f, err := os.Open(filepath.Join(root, "testdata", "datasets", name+".csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var ts []time.Time
	var vs []float64
	for _, r := range rows[1:] {
		y, err := strconv.ParseFloat(r[0], 64)
		if err != nil {
			t.Fatal(err)
		}
		v := math.NaN()
		if r[1] != "NA" {
			if v, err = strconv.ParseFloat(r[1], 64); err != nil {
				t.Fatal(err)
			}
		}
		ts = append(ts, decimalYear(y))
		vs = append(vs, v)
	}
	return ts, vs
}

type refCase struct {
	ID         string    `json:"id"`
	Data       string    `json:"data"`
	Transform  string    `json:"transform"`
	Forecast   []float64 `json:"forecast"`
	ForecastSE []float64 `json:"forecast_se"`
}

// refForecast returns R 4.2.2 predict.Arima's forecast for case id from
// testdata/r/arima_refs.json (written by testdata/r/arima_refs.R), as
// chart data in raw units: the median is exp(f) for a log fit, and the
// bounds of the central level-% interval are exp(f ± z·se) with z the
// standard normal quantile (the interval on the model's scale mapped
// through the inverse transform).
func refForecast(t testing.TB, id string, levels []float64) *Data {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(root, "testdata", "r", "arima_refs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var refs struct{ Cases []refCase }
	if err := json.Unmarshal(b, &refs); err != nil {
		t.Fatal(err)
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
		ts, vs := loadDataset(t, c.Data)
		d := &Data{Title: c.Data, Times: ts, Values: vs, Levels: levels}
		last := ts[len(ts)-1]
		for h := range c.Forecast {
			p := Point{Time: last.AddDate(0, h+1, 0), Median: inv(c.Forecast[h])}
			for _, l := range levels {
				z := distuv.UnitNormal.Quantile(0.5 + l/200)
				p.Lower = append(p.Lower, inv(c.Forecast[h]-z*c.ForecastSE[h]))
				p.Upper = append(p.Upper, inv(c.Forecast[h]+z*c.ForecastSE[h]))
			}
			d.Forecast = append(d.Forecast, p)
		}
		return d
	}
	t.Fatalf("no reference case %q", id)
	return nil
}

// synthetic is a seeded minute series of n points (a daily cycle plus a
// random walk) with a 60-step forecast fan, for benchmarks and
// decimation checks; it is invented data, not a reference.
func synthetic(n int, seed uint64) *Data {
	rng := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2025, 3, 4, 0, 0, 0, 0, time.UTC)
	d := &Data{Title: "synthetic", Levels: []float64{80, 95}}
	level := 1000.0
	for i := range n {
		level += rng.NormFloat64() * 3
		d.Times = append(d.Times, t0.Add(time.Duration(i)*time.Minute))
		d.Values = append(d.Values, level+200*math.Sin(2*math.Pi*float64(i)/1440))
	}
	last := d.Values[n-1]
	for h := 1; h <= 60; h++ {
		s := 3 * math.Sqrt(float64(h))
		d.Forecast = append(d.Forecast, Point{
			Time: d.Times[n-1].Add(time.Duration(h) * time.Minute), Median: last,
			Lower: []float64{last - 1.2816*s, last - 1.96*s},
			Upper: []float64{last + 1.2816*s, last + 1.96*s},
		})
	}
	d.Thresholds = []Threshold{{Name: "high", Value: last + 150, Above: true}}
	d.Refits = []time.Time{d.Times[n/2], d.Times[n-100]}
	return d
}
