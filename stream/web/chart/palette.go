package chart

import (
	"image/color"
	"math"
)

// The palette. The forecast is warm (a sequential amber ramp for the bands,
// a purple median path), the past is a cool neutral slate, and an alert
// rule's line is red while raised and grey while cleared. Every colour
// that carries meaning sits at its own lightness, so the chart still reads
// in greyscale; DESIGN.md gives the contrast figures and chart_test.go
// checks them.
//
// Sources of the published colours:
//
//	[Tol] P. Tol, "Colour Schemes", SRON technical note SRON/EPS/TN/09-002,
//	      issue 3.2, 18 August 2021: the "muted" and "vibrant" qualitative
//	      schemes (designed to stay distinct for colour-blind readers) and
//	      the "YlOrBr" sequential scheme (lightness falls monotonically, so
//	      it keeps its order in greyscale).
//
// The neutrals (slate, greys, grid) are our own.
var (
	colHistory = rgb(0x3e4c59) // slate, ours
	colMedian  = rgb(0xaa4499) // [Tol] muted "purple"
	colRaised  = rgb(0xcc3311) // [Tol] vibrant "red"
	colCleared = rgb(0x707070) // neutral grey, ours
	colOrigin  = rgb(0x8794a1) // light slate, ours
	colRefit   = rgb(0x5f6b77) // mid slate, ours
	colGrid    = rgb(0xe6e1d8) // warm paper grey, ours
	colAxis    = rgb(0xa9b1b9) // pale slate, ours
	colText    = rgb(0x2e3a45) // dark slate, ours
	colEdge    = rgb(0xfb9a29) // [Tol] YlOrBr, 5th of 9: the fan's outer contour
)

// bandRamp is [Tol] YlOrBr from its 3rd to its 4th colour, widest band
// first: the bands take evenly spaced places on it (linear in sRGB, as
// the note allows for its sequential schemes). The lighter colours of the
// scheme are left out: in greyscale they come too close to the white
// background; the darker ones are left out so that the median path keeps
// a contrast of 3:1 against every band.
var bandRamp = []color.RGBA{rgb(0xfee391), rgb(0xfec44f)}

func rgb(v uint32) color.RGBA {
	return color.RGBA{R: uint8(v >> 16), G: uint8(v >> 8), B: uint8(v), A: 0xff}
}

// MedianColor is the colour of the median path.
func MedianColor() color.RGBA { return colMedian }

// HistoryColor is the colour of the history line.
func HistoryColor() color.RGBA { return colHistory }

// ThresholdColor is the colour of an alert rule's line: red while the
// alert is raised, grey while it is cleared.
func ThresholdColor(raised bool) color.RGBA {
	if raised {
		return colRaised
	}
	return colCleared
}

// BandColor returns the fill colour of the band at rank i of n, i = 0
// being the narrowest (lowest level). The narrowest band is the darker
// end of the ramp (#FEC44F) and the widest the lighter end (#FEE391);
// bands between are evenly spaced on it. The HTTP surface's browser test
// looks for BandColor(0, 2) and BandColor(1, 2) in a screenshot.
func BandColor(i, n int) color.RGBA {
	dark, light := bandRamp[len(bandRamp)-1], bandRamp[0]
	if n <= 1 || i <= 0 {
		return dark
	}
	if i >= n-1 {
		return light
	}
	t := float64(i) / float64(n-1)
	mix := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + t*(float64(y)-float64(x)))) }
	return color.RGBA{R: mix(dark.R, light.R), G: mix(dark.G, light.G), B: mix(dark.B, light.B), A: 0xff}
}
