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
		Levels: []float64{80, 95},
		Forecast: []chart.Point{
			{Time: t0.Add(3 * time.Minute), Median: 11.5, Lower: []float64{10, 9}, Upper: []float64{13, 14}},
			{Time: t0.Add(4 * time.Minute), Median: 11.8, Lower: []float64{9.5, 8}, Upper: []float64{14, 16}},
		},
		Thresholds: []chart.Threshold{{Name: "busy", Value: 15, Above: true}},
	}
	var buf bytes.Buffer
	if err := chart.Render(&buf, chart.SVG, d, chart.Options{Width: 600, Height: 300}); err != nil {
		fmt.Println(err)
		return
	}
	svg := buf.String()
	fmt.Println(strings.Contains(svg, `width="450pt" height="225pt"`))
	fmt.Println(strings.Contains(svg, "busy: above 15"))
	// Output:
	// true
	// true
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
