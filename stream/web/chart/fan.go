package chart

import (
	"math"

	"gonum.org/v1/plot/plotter"
)

// fan is the forecast laid out on the time axis. Step h is drawn as a
// flat step over [left[h], right[h]), centred on its time x[h] and
// reaching halfway to its neighbours; the first step begins halfway
// between the last history bucket and the first forecast time, which is
// where the origin rule stands. The median path starts at the anchor, the
// last finite history value, when there is one.
type fan struct {
	x, left, right []float64
	origin         float64
	ax, ay         float64
	anchored       bool
}

// newFan lays out d's forecast; nil when there is none.
func newFan(d *Data) *fan {
	n := len(d.Forecast)
	if n == 0 {
		return nil
	}
	f := &fan{x: make([]float64, n), left: make([]float64, n), right: make([]float64, n)}
	for i, p := range d.Forecast {
		f.x[i] = secs(p.Time)
	}
	// The time before the first step: the last history bucket before it,
	// else one step back.
	prev, ok := 0.0, false
	for i := len(d.Times) - 1; i >= 0; i-- {
		if d.Times[i].Before(d.Forecast[0].Time) {
			prev, ok = secs(d.Times[i]), true
			break
		}
	}
	if !ok {
		switch {
		case n > 1:
			prev = f.x[0] - (f.x[1] - f.x[0])
		case len(d.Times) > 1:
			prev = f.x[0] - (secs(d.Times[len(d.Times)-1]) - secs(d.Times[len(d.Times)-2]))
		default:
			prev = f.x[0] - 60
		}
	}
	for i := range n {
		if i == 0 {
			f.left[i] = (prev + f.x[0]) / 2
		} else {
			f.left[i] = (f.x[i-1] + f.x[i]) / 2
			f.right[i-1] = f.left[i]
		}
	}
	f.right[n-1] = f.x[n-1] + (f.x[n-1] - f.left[n-1])
	f.origin = f.left[0]
	f.ax, f.ay, f.anchored = anchor(d)
	return f
}

// anchor is the last finite history point when it comes before the first
// forecast point: the median path starts from it.
func anchor(d *Data) (x, y float64, ok bool) {
	first := d.Forecast[0].Time
	for i := len(d.Values) - 1; i >= 0; i-- {
		if !d.Times[i].Before(first) {
			continue
		}
		if finite(d.Values[i]) {
			return secs(d.Times[i]), d.Values[i], true
		}
		return 0, 0, false // the last bucket is missing: no anchor
	}
	return 0, 0, false
}

// band is the staircase outline of level li: the upper bounds forward,
// the lower bounds backward. An unbounded endpoint runs to the edge of
// the value range.
func (f *fan) band(d *Data, li int, r valueRange) *plotter.Polygon {
	if f == nil {
		return nil
	}
	n := len(d.Forecast)
	clamp := func(v, edge float64) float64 {
		if !finite(v) {
			return edge
		}
		return math.Max(r.lo, math.Min(r.hi, v))
	}
	ring := make(plotter.XYs, 0, 4*n)
	for i, p := range d.Forecast {
		y := clamp(p.Upper[li], r.hi)
		ring = append(ring, plotter.XY{X: f.left[i], Y: y}, plotter.XY{X: f.right[i], Y: y})
	}
	for i := n - 1; i >= 0; i-- {
		y := clamp(d.Forecast[i].Lower[li], r.lo)
		ring = append(ring, plotter.XY{X: f.right[i], Y: y}, plotter.XY{X: f.left[i], Y: y})
	}
	return &plotter.Polygon{XYs: []plotter.XYs{ring}}
}

// xRange spans the history and the forecast's steps; without a forecast
// it leaves 1.5 % of the span free on the right.
func xRange(d *Data, f *fan) (x0, x1 float64, ok bool) {
	x0, x1 = math.Inf(1), math.Inf(-1)
	if n := len(d.Times); n > 0 {
		x0, x1 = secs(d.Times[0]), secs(d.Times[n-1])
	}
	if f != nil {
		x0 = math.Min(x0, f.left[0])
		x1 = math.Max(x1, f.right[len(f.right)-1])
	}
	if x0 > x1 {
		return 0, 0, false
	}
	if x0 == x1 {
		x0, x1 = x0-1800, x1+1800
	}
	if f == nil {
		// Room on the right for the dot on the last closed bucket.
		x1 += 0.015 * (x1 - x0)
	}
	return x0, x1, true
}
