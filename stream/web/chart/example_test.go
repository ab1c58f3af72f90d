package chart_test

import (
	"bytes"
	"fmt"
	"strings"
	"time"

	"forewarn/stream/web/chart"
)

// Draw a small series with a two-step forecast and one alert threshold as
// SVG (invented numbers).
func ExampleRender() {
	t0 := time.Date(2025, 3, 4, 12, 0, 0, 0, time.UTC)
	d := &chart.Data{
		Title:  "shop.orders",
		Times:  []time.Time{t0, t0.Add(time.Minute), t0.Add(2 * time.Minute)},
		Values: []float64{10, 12, 11},
		Levels: []float64{50, 90},
		Forecast: []chart.Point{
			{Time: t0.Add(3 * time.Minute), Median: 11.5, Lower: []float64{10.5, 9}, Upper: []float64{12.5, 14}},
			{Time: t0.Add(4 * time.Minute), Median: 11.8, Lower: []float64{10.3, 8}, Upper: []float64{13.3, 16}},
		},
		Thresholds: []chart.Threshold{{Name: "busy", Value: 15, Above: true, Raised: true}},
	}
	var buf bytes.Buffer
	if err := chart.Render(&buf, chart.SVG, d, chart.Options{Width: 600, Height: 300}); err != nil {
		fmt.Println(err)
		return
	}
	svg := buf.String()
	fmt.Println(strings.Contains(svg, `width="450pt" height="225pt"`))
	for _, entry := range []string{"median path, next 2m", "50 % band", "busy: above 15 (raised)"} {
		fmt.Println(entry, strings.Contains(svg, ">"+entry+"<"))
	}
	// Output:
	// true
	// median path, next 2m true
	// 50 % band true
	// busy: above 15 (raised) true
}

func ExampleFormatOf() {
	for _, name := range []string{"fit.svg", "fit.png", "fit.pdf"} {
		f, err := chart.FormatOf(name)
		fmt.Println(name, f == chart.SVG, f == chart.PNG, err != nil)
	}
	// Output:
	// fit.svg true false false
	// fit.png false true false
	// fit.pdf false false true
}
