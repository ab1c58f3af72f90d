package demo_test

import (
	"fmt"
	"time"

	"forewarn/engine/series"
	"forewarn/stream/demo"
)

// The line shapes are the demo's own (package doc); the numbers are
// written by package humanfmt.
func ExampleForecastLine() {
	origin := time.Date(2026, 11, 6, 4, 0, 0, 0, time.UTC)
	f := &series.Forecast{Topic: "storage.vol1.used_bytes", Origin: origin, StepSeconds: 300, LastValue: 8.123456e11,
		Model:  series.ModelInfo{Spec: "ARIMA 1,1,0 + drift", Transform: "none"},
		Levels: []float64{50, 90}}
	for h := 1; h <= 72; h++ {
		f.Points = append(f.Points, series.Point{H: h, Median: 8.123456e11 + float64(h)*0.2167e9,
			Lower: []series.Bound{{Value: 8.6e11, OK: true}, {Value: 8.5e11, OK: true}},
			Upper: []series.Bound{{}, {Value: 8.7201e11, OK: true}}})
	}
	fmt.Println(demo.ForecastLine(f))
	f.Points[71].Lower[1] = series.Bound{}
	fmt.Println(demo.ForecastLine(f))
	// Output:
	// 2026-11-06 04:00 forecast storage.vol1.used_bytes last 812.3 G median 827.9 G at +6h 90% band 850 G to 872.0 G transform none model ARIMA 1,1,0 + drift
	// 2026-11-06 04:00 forecast storage.vol1.used_bytes last 812.3 G median 827.9 G at +6h 90% band unbounded to 872.0 G transform none model ARIMA 1,1,0 + drift
}

func ExampleAlertLine() {
	origin := time.Date(2026, 11, 6, 4, 0, 0, 0, time.UTC)
	e := &series.AlertEvent{Topic: "storage.vol1.used_bytes", Rule: "volume-nearly-full", Raised: true,
		Direction: "above", Threshold: 9e11, Probability: 0.934, WithinSeconds: 6 * 3600,
		ETA: origin.Add(4*time.Hour + 10*time.Minute), HasETA: true, Origin: origin}
	fmt.Println(demo.AlertLine(e))
	e.Raised, e.Probability, e.HasETA, e.Origin = false, 0.0123, false, origin.Add(30*time.Hour)
	fmt.Println(demo.AlertLine(e))
	// Output:
	// 2026-11-06 04:00 alert storage.vol1.used_bytes volume-nearly-full raised p=0.93 above 900 G within 6h eta +4h10m
	// 2026-11-07 10:00 alert storage.vol1.used_bytes volume-nearly-full cleared p=0.01 above 900 G within 6h eta none
}
