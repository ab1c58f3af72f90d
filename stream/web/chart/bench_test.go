package chart

import (
	"io"
	"testing"
)

// BenchmarkChart2000 renders the default-size SVG chart of a 2000-point
// series with a 60-step fan, two thresholds and refit markers. Target
// (issue 7): under 20 ms per chart.
func BenchmarkChart2000(b *testing.B) {
	d := synthetic(2000, 7)
	d.Thresholds = append(d.Thresholds, Threshold{Name: "low", Value: 700, Above: false})
	b.ReportAllocs()
	for b.Loop() {
		if err := Render(io.Discard, SVG, d, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkChart2000Small is the same series as a compact index chart.
func BenchmarkChart2000Small(b *testing.B) {
	d := synthetic(2000, 7)
	b.ReportAllocs()
	for b.Loop() {
		if err := Render(io.Discard, SVG, d, Options{Width: 320, Height: 120}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkChart2000PNG is the offline PNG path.
func BenchmarkChart2000PNG(b *testing.B) {
	d := synthetic(2000, 7)
	b.ReportAllocs()
	for b.Loop() {
		if err := Render(io.Discard, PNG, d, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkChart2000Wide draws all 2000 points (1200 px wide: below the
// thinning threshold of two points per pixel column).
func BenchmarkChart2000Wide(b *testing.B) {
	d := synthetic(2000, 7)
	b.ReportAllocs()
	for b.Loop() {
		if err := Render(io.Discard, SVG, d, Options{Width: 1200, Height: 500}); err != nil {
			b.Fatal(err)
		}
	}
}
