package chart

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"forewarn/stream/web/internal/webtest"
)

// refForecast is R 4.2.2 predict.Arima's forecast of case id (see
// package webtest) as chart data.
func refForecast(t testing.TB, id string, levels []float64) *Data {
	t.Helper()
	r := webtest.Forecast(t, id, levels)
	d := &Data{Title: r.Data, Times: r.Times, Values: r.Values, Levels: levels}
	for h := range r.Median {
		d.Forecast = append(d.Forecast, Point{Time: r.ForecastTimes[h], Median: r.Median[h], Lower: r.Lower[h], Upper: r.Upper[h]})
	}
	return d
}

// synthetic is a seeded minute series of n points (a daily cycle plus a
// random walk) with a 60-step forecast fan, for benchmarks and
// decimation checks; it is invented data, not a reference.
func synthetic(n int, seed uint64) *Data {
	rng := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2025, 3, 4, 0, 0, 0, 0, time.UTC)
	d := &Data{Title: "synthetic", Levels: []float64{50, 90}}
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
			Lower: []float64{last - 0.6745*s, last - 1.6449*s},
			Upper: []float64{last + 0.6745*s, last + 1.6449*s},
		})
	}
	d.Thresholds = []Threshold{{Name: "high", Value: last + 150, Above: true}}
	d.Refits = []time.Time{d.Times[n/2], d.Times[n-100]}
	return d
}
