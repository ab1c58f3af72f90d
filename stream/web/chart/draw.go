package chart

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

func secs(t time.Time) float64 { return float64(t.UnixNano()) / 1e9 }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Line styles. Each mark differs from the others by its pattern or weight
// as well as by its colour, so no meaning rests on hue alone.
var (
	styHistory = draw.LineStyle{Color: colHistory, Width: vg.Points(1.2)}
	styMedian  = draw.LineStyle{Color: colMedian, Width: vg.Points(1.7),
		Dashes: []vg.Length{vg.Points(4.5), vg.Points(2)}}
	styRaised = draw.LineStyle{Color: colRaised, Width: vg.Points(1.5),
		Dashes: []vg.Length{vg.Points(12), vg.Points(3)}}
	styCleared = draw.LineStyle{Color: colCleared, Width: vg.Points(1),
		Dashes: []vg.Length{vg.Points(1.2), vg.Points(2.4)}}
	styOrigin = draw.LineStyle{Color: colOrigin, Width: vg.Points(0.8)}
	styEdge   = draw.LineStyle{Color: colEdge, Width: vg.Points(0.6)}
	styGrid   = draw.LineStyle{Color: colGrid, Width: vg.Points(0.6)}
	styAxis   = draw.LineStyle{Color: colAxis, Width: vg.Points(0.6)}
)

// draw1 lays the chart out on c: the title on top at the left, the plot
// below it, the legend to the right of the plot (full-size charts only).
func draw1(c draw.Canvas, d *Data, wpx int) {
	compact := wpx < CompactWidth
	c.SetColor(color.White)
	c.Fill(c.Rectangle.Path())

	f := newFan(d)
	x0, x1, hasX := xRange(d, f)
	if !hasX {
		x0, x1 = 0, 1
	}
	r := yRange(d)
	p := newPlot(d, compact, hasX, wpx)
	p.X.Min, p.X.Max = x0, x1
	p.Y.Min, p.Y.Max = r.lo, r.hi

	// Compact charts draw the same marks with thinner lines.
	median, raised, cleared := styMedian, styRaised, styCleared
	if compact {
		median, raised, cleared = thinner(median), thinner(raised), thinner(cleared)
	}
	var leg entries

	// Bands first, widest at the bottom so that narrower ones lie on top;
	// each is a staircase, one flat step per forecast step. The widest
	// carries a thin contour.
	order := make([]int, len(d.Levels))
	for i := range order {
		order[i] = i
	}
	slices.SortFunc(order, func(a, b int) int { return -cmpFloat(d.Levels[a], d.Levels[b]) })
	for rank, li := range order {
		if poly := f.band(d, li, r); poly != nil {
			poly.Color = BandColor(len(order)-1-rank, len(order))
			if rank == 0 {
				poly.LineStyle = styEdge
			}
			p.Add(poly)
		}
	}
	for i := range order { // legend: narrowest first
		sw := &plotter.Polygon{Color: BandColor(i, len(order)), LineStyle: styEdge}
		leg.add(fmt.Sprintf("%s %% band", formatLevel(d.Levels[order[len(order)-1-i]])), sw)
	}

	// The origin rule, where the history ends and the forecast begins.
	if f != nil && f.origin >= x0 && f.origin <= x1 {
		p.Add(&plotter.Line{XYs: plotter.XYs{{X: f.origin, Y: r.lo}, {X: f.origin, Y: r.hi}}, LineStyle: styOrigin})
		leg.add("forecast origin", thumbFunc(func(c *draw.Canvas) {
			x := c.Center().X
			c.StrokeLine2(styOrigin, x, c.Min.Y, x, c.Max.Y)
		}))
	}

	// Refits: small triangles standing on the time axis.
	ref := &refits{}
	for _, t := range d.Refits {
		if x := secs(t); x >= x0 && x <= x1 {
			ref.x = append(ref.x, x)
		}
	}
	if len(ref.x) > 0 {
		p.Add(ref)
		leg.add("refit", ref)
	}

	// Alert rules, under the data lines; one that lies outside the value
	// range is only named in the legend.
	for _, th := range d.Thresholds {
		if !finite(th.Value) {
			continue
		}
		st := cleared
		if th.Raised {
			st = raised
		}
		l := &plotter.Line{XYs: plotter.XYs{{X: x0, Y: th.Value}, {X: x1, Y: th.Value}}, LineStyle: st}
		if th.Value >= r.lo && th.Value <= r.hi {
			p.Add(l)
		}
		leg.add(thresholdLabel(th, r), l)
		leg[len(leg)-1].rule = th.Name
	}

	// The history, with a dot on the last closed bucket, and the median
	// path on top of everything; both lead the legend.
	var lead entries
	if len(d.Times) > 0 {
		h := newHistory(d, wpx, x0, x1)
		h.style = styHistory
		p.Add(h)
		lead.add("history", h)
	}
	if f != nil {
		var xy plotter.XYs
		if f.anchored {
			xy = append(xy, plotter.XY{X: f.ax, Y: f.ay})
		}
		for i, pt := range d.Forecast {
			if finite(pt.Median) {
				xy = append(xy, plotter.XY{X: f.x[i], Y: pt.Median})
			}
		}
		med := &plotter.Line{XYs: xy, LineStyle: median}
		p.Add(med)
		lead.add(medianLabel(d, f), med)
	}
	leg = append(lead, leg...)

	title := d.Title
	if compact {
		title = ""
	}
	if !hasX {
		title = strings.TrimSpace(d.Title + " — no data yet")
	}
	if title != "" {
		st := draw.TextStyle{Color: colText, Font: font.From(sans, 12), XAlign: draw.XLeft, YAlign: draw.YTop,
			Handler: p.Title.TextStyle.Handler}
		c.FillText(st, vg.Point{X: c.Min.X + 6, Y: c.Max.Y - 5}, title)
		c = draw.Crop(c, 0, 0, 0, -(st.Rectangle(title).Size().Y + 12))
	}
	if compact || len(leg) == 0 {
		p.Draw(c)
		return
	}
	l := plot.NewLegend()
	l.TextStyle.Font = font.From(sans, 9)
	l.TextStyle.Color = colText
	l.Top, l.Left = true, true
	l.ThumbnailWidth = 20
	l.Padding = 4
	// The legend keeps to a third of the width: a rule name that would
	// take more is cut short with an ellipsis.
	room := c.Size().X/3 - 14 - l.ThumbnailWidth - l.TextStyle.Rectangle(" ").Max.X
	for _, e := range leg {
		l.Add(fitName(e.name, e.rule, room, l.TextStyle), e.thumb)
	}
	lw := min(l.Rectangle(c).Size().X+14, c.Size().X/3)
	p.Draw(draw.Crop(c, 0, -lw, 0, 0))
	l.Draw(draw.Crop(c, c.Size().X-lw+10, 0, 0, -4))
}

// newPlot sets up the axes: tick labels in dark slate, a pale time axis,
// no value axis line (the horizontal grid carries the values).
func newPlot(d *Data, compact, hasX bool, wpx int) *plot.Plot {
	p := plot.New()
	tick, label := vg.Length(9), vg.Length(10)
	if compact {
		tick = 7
	}
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Tick.Label.Font = font.From(sans, tick)
		a.Tick.Label.Color = colText
		a.Label.TextStyle.Font = font.From(sans, label)
		a.Label.TextStyle.Color = colText
		a.LineStyle, a.Tick.LineStyle = styAxis, styAxis
		a.Padding = 0
	}
	p.Y.LineStyle.Width, p.Y.Tick.LineStyle.Width = 0, 0
	if !compact {
		p.X.Label.Text = "time (UTC)"
	}
	switch {
	case !hasX:
		p.X.Tick.Marker = plot.ConstantTicks(nil)
		p.Y.Tick.Marker = plot.ConstantTicks(nil)
	case d.Index:
		p.X.Tick.Marker = valueTicker{}
		p.Y.Tick.Marker = valueTicker{}
		if !compact {
			p.X.Label.Text = "observation"
		}
	default:
		p.X.Tick.Marker = timeTicker{maxLabels: max(2, wpx/120)}
		p.Y.Tick.Marker = valueTicker{}
	}
	g := plotter.NewGrid()
	g.Vertical.Width = 0
	g.Horizontal = styGrid
	p.Add(g)
	return p
}

// entries are legend entries in their order.
type entries []entry

type entry struct {
	name  string
	thumb plot.Thumbnailer
	rule  string // an alert rule's name, the part of name that may be cut
}

func (e *entries) add(name string, th plot.Thumbnailer) {
	*e = append(*e, entry{name: name, thumb: th})
}

// fitName shortens the rule name at the start of label, if need be, until
// label is at most room wide in style st; a label without a rule name is
// returned as it is.
func fitName(label, rule string, room vg.Length, st draw.TextStyle) string {
	if rule == "" || !strings.HasPrefix(label, rule) {
		return label
	}
	rest := label[len(rule):]
	name := []rune(rule)
	for st.Rectangle(label).Size().X > room && len(name) > 4 {
		name = name[:len(name)-1]
		label = string(name) + "…" + rest
	}
	return label
}

// thinner is st at 70 % of its width and dash lengths.
func thinner(st draw.LineStyle) draw.LineStyle {
	st.Width *= 0.7
	st.Dashes = slices.Clone(st.Dashes)
	for i := range st.Dashes {
		st.Dashes[i] *= 0.7
	}
	return st
}

// thumbFunc is a legend thumbnail drawn by a function.
type thumbFunc func(c *draw.Canvas)

// Thumbnail implements plot.Thumbnailer.
func (f thumbFunc) Thumbnail(c *draw.Canvas) { f(c) }

// refits marks refit times with small triangles on the time axis.
type refits struct{ x []float64 }

var refitGlyph = draw.GlyphStyle{Color: colRefit, Radius: vg.Points(3), Shape: draw.PyramidGlyph{}}

// Plot implements plot.Plotter.
func (m *refits) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, _ := plt.Transforms(&c)
	for _, x := range m.x {
		c.DrawGlyph(refitGlyph, vg.Point{X: trX(x), Y: c.Min.Y + refitGlyph.Radius})
	}
}

// Thumbnail implements plot.Thumbnailer.
func (m *refits) Thumbnail(c *draw.Canvas) { c.DrawGlyph(refitGlyph, c.Center()) }

// thresholdLabel is an alert rule's legend entry with its state word
// (ITU-T X.733 alarm states), e.g. "disk-full: above 900 G (raised)",
// "quiet: below 150 (cleared, off chart)".
func thresholdLabel(th Threshold, r valueRange) string {
	dir := "above"
	if !th.Above {
		dir = "below"
	}
	state := "cleared"
	if th.Raised {
		state = "raised"
	}
	if th.Value < r.lo || th.Value > r.hi {
		state += ", off chart"
	}
	return fmt.Sprintf("%s: %s %s (%s)", th.Name, dir, formatExact(th.Value), state)
}

// medianLabel is the median path's legend entry with the horizon as a
// person writes it: "median path, next 12h", "next 24 months", "next 10
// steps".
func medianLabel(d *Data, f *fan) string {
	if h := horizon(d, f); h != "" {
		return "median path, next " + h
	}
	return "median path"
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func formatLevel(l float64) string {
	if l == math.Trunc(l) {
		return fmt.Sprintf("%.0f", l)
	}
	return fmt.Sprintf("%g", l)
}
