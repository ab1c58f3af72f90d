package chart

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// history draws the observed values as a polyline that breaks at missing
// values; an isolated value between two gaps is drawn as a dot.
type history struct {
	x, y  []float64 // NaN in y breaks the line
	style draw.LineStyle
	// last is the last finite value (the last closed bucket with a
	// value), marked with a dot; ok is false when there is none.
	lastX, lastY float64
	ok           bool
}

// newHistory copies the history of d, thinned to at most two points per
// pixel column when it is longer than twice the chart's width.
func newHistory(d *Data, wpx int, x0, x1 float64) *history {
	n := len(d.Times)
	x := make([]float64, n)
	for i, t := range d.Times {
		x[i] = secs(t)
	}
	h := &history{x: x, y: d.Values}
	for i := n - 1; i >= 0; i-- {
		if finite(d.Values[i]) {
			h.lastX, h.lastY, h.ok = x[i], d.Values[i], true
			break
		}
	}
	if n > 2*wpx {
		h.x, h.y = decimate(x, d.Values, wpx, x0, x1)
	}
	return h
}

// decimate keeps, per column of width (x1−x0)/cols and per run of
// finite values, the minimum and the maximum in their original order. A
// missing value survives as one NaN so that gaps stay visible. The result
// has at most 2·cols + (number of gaps) points.
func decimate(x, y []float64, cols int, x0, x1 float64) (dx, dy []float64) {
	dx = make([]float64, 0, 2*cols+16)
	dy = make([]float64, 0, 2*cols+16)
	w := (x1 - x0) / float64(cols)
	if !(w > 0) {
		return append(dx, x...), append(dy, y...)
	}
	lo, hi := -1, -1 // indices of the min and max in the current column run
	col := math.MinInt
	flush := func() {
		switch {
		case lo < 0:
		case lo == hi:
			dx, dy = append(dx, x[lo]), append(dy, y[lo])
		case lo < hi:
			dx, dy = append(dx, x[lo], x[hi]), append(dy, y[lo], y[hi])
		default:
			dx, dy = append(dx, x[hi], x[lo]), append(dy, y[hi], y[lo])
		}
		lo, hi = -1, -1
	}
	gap := false
	for i := range x {
		if !finite(y[i]) {
			if !gap {
				flush()
				dx, dy = append(dx, x[i]), append(dy, math.NaN())
				gap = true
			}
			continue
		}
		gap = false
		c := int(math.Floor((x[i] - x0) / w))
		if c != col {
			flush()
			col = c
		}
		if lo < 0 || y[i] < y[lo] {
			lo = i
		}
		if hi < 0 || y[i] > y[hi] {
			hi = i
		}
	}
	flush()
	return dx, dy
}

// Plot implements plot.Plotter.
func (h *history) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, trY := plt.Transforms(&c)
	dot := draw.GlyphStyle{Color: h.style.Color, Radius: vg.Points(1.2), Shape: draw.CircleGlyph{}}
	run := make([]vg.Point, 0, len(h.x))
	end := func() {
		switch len(run) {
		case 0:
		case 1:
			if c.Contains(run[0]) {
				c.DrawGlyph(dot, run[0])
			}
		default:
			c.StrokeLines(h.style, c.ClipLinesXY(run)...)
		}
		run = run[:0]
	}
	for i, x := range h.x {
		if !finite(h.y[i]) {
			end()
			continue
		}
		run = append(run, vg.Point{X: trX(x), Y: trY(h.y[i])})
	}
	end()
	if h.ok {
		p := vg.Point{X: trX(h.lastX), Y: trY(h.lastY)}
		if c.Contains(p) {
			h.dot(&c, p)
		}
	}
}

// dot marks the last closed bucket: a slate disc in a white ring that
// keeps it apart from the lines it sits on.
func (h *history) dot(c *draw.Canvas, p vg.Point) {
	c.DrawGlyph(draw.GlyphStyle{Color: color.White, Radius: vg.Points(3.4), Shape: draw.CircleGlyph{}}, p)
	c.DrawGlyph(draw.GlyphStyle{Color: h.style.Color, Radius: vg.Points(2.4), Shape: draw.CircleGlyph{}}, p)
}

// Thumbnail implements plot.Thumbnailer: the line with its end dot.
func (h *history) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(h.style, c.Min.X, y, c.Max.X, y)
	h.dot(c, vg.Point{X: c.Max.X - vg.Points(3.4), Y: y})
}
