package chart

import (
	"bytes"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Data is everything one chart shows. The zero value is a valid, empty
// chart ("no data yet").
type Data struct {
	// Title is printed above a full-size chart (left out of compact ones).
	Title string

	// Times and Values are the history, oldest first: Values[i] is the
	// value of the bucket that starts at Times[i]. NaN is a missing value.
	Times  []time.Time
	Values []float64

	// Forecast holds the forecast points, nearest first.
	Forecast []Point

	// Levels are the central interval levels in percent, e.g. [80 95];
	// Point.Lower[i] and Point.Upper[i] belong to Levels[i].
	Levels []float64

	// Thresholds are the alert rules watching the series.
	Thresholds []Threshold

	// Refits are the data times at which the model was refitted.
	Refits []time.Time

	// Index draws the x axis as observation numbers: Times then hold
	// time.Unix(i, 0) for observation i (counted from 1), as Offline.Data
	// makes them for a CSV without a time column.
	Index bool
}

// Point is one forecast step.
type Point struct {
	Time   time.Time
	Median float64
	// Lower and Upper hold one bound per level; NaN or ±Inf is unbounded.
	Lower, Upper []float64
}

// Threshold is the line of one alert rule.
type Threshold struct {
	Name   string
	Value  float64
	Above  bool // the rule fires when the series goes above Value
	Firing bool
}

// Format is an output format.
type Format int

const (
	// SVG is scalable vector graphics (image/svg+xml).
	SVG Format = iota + 1
	// PNG is a raster image at 96 dots per inch.
	PNG
)

// Sizes in pixels.
const (
	DefaultWidth, DefaultHeight = 900, 420
	MinWidth, MinHeight         = 120, 60
	MaxWidth, MaxHeight         = 4000, 3000

	// CompactWidth: charts narrower than this leave out the title, the
	// axis captions and the legend, for lists of small charts.
	CompactWidth = 480
)

// Options are the optional knobs of a chart. The zero value draws a
// DefaultWidth × DefaultHeight chart.
type Options struct {
	Width, Height int // pixels; zero means the default
}

// FormatOf returns the format named by a file's extension (.svg or .png,
// any case).
func FormatOf(path string) (Format, error) {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".svg":
		return SVG, nil
	case ".png":
		return PNG, nil
	}
	return 0, fmt.Errorf("%w: %q (want .svg or .png)", ErrFormat, path)
}

// WriteFile renders d to path in the format its extension names.
func WriteFile(path string, d *Data, o Options) error {
	f, err := FormatOf(path)
	if err != nil {
		return err
	}
	file, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("chart: %w", err)
	}
	if err := Render(file, f, d, o); err != nil {
		file.Close()
		return err
	}
	if err := file.Close(); err != nil {
		return fmt.Errorf("chart: %w", err)
	}
	return nil
}

// Render draws d and writes it to w in format f.
func Render(w io.Writer, f Format, d *Data, o Options) error {
	if f != SVG && f != PNG {
		return fmt.Errorf("%w: %d", ErrFormat, f)
	}
	wpx, hpx, err := o.size()
	if err != nil {
		return err
	}
	if err := check(d); err != nil {
		return err
	}
	// 1 px is 0.75 pt (CSS reference pixel: 96 px per inch, 72 pt per inch).
	wl, hl := vg.Length(wpx)*0.75, vg.Length(hpx)*0.75
	var c vg.CanvasWriterTo
	switch f {
	case SVG:
		c = vgsvg.New(wl, hl)
	case PNG:
		c = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(wl, hl), vgimg.UseDPI(96))}
	}
	draw1(draw.New(c), d, wpx)
	if f == SVG {
		// The SVG names the font the text was measured with; give browsers
		// without it a close fallback instead of their default serif face.
		var buf bytes.Buffer
		if _, err := c.WriteTo(&buf); err != nil {
			return fmt.Errorf("chart: write: %w", err)
		}
		b := bytes.ReplaceAll(buf.Bytes(), []byte("font-family:Liberation Sans;"),
			[]byte("font-family:'Liberation Sans',Arial,Helvetica,sans-serif;"))
		if _, err := w.Write(b); err != nil {
			return fmt.Errorf("chart: write: %w", err)
		}
		return nil
	}
	if _, err := c.WriteTo(w); err != nil {
		return fmt.Errorf("chart: write: %w", err)
	}
	return nil
}

func (o Options) size() (w, h int, err error) {
	w, h = o.Width, o.Height
	if w == 0 {
		w = DefaultWidth
	}
	if h == 0 {
		h = DefaultHeight
	}
	if w < MinWidth || w > MaxWidth || h < MinHeight || h > MaxHeight {
		return 0, 0, fmt.Errorf("%w: %d×%d px (width %d–%d, height %d–%d)",
			ErrSize, w, h, MinWidth, MaxWidth, MinHeight, MaxHeight)
	}
	return w, h, nil
}

func check(d *Data) error {
	if len(d.Times) != len(d.Values) {
		return fmt.Errorf("%w: %d history times, %d values", ErrShape, len(d.Times), len(d.Values))
	}
	for i := 1; i < len(d.Times); i++ {
		if d.Times[i].Before(d.Times[i-1]) {
			return fmt.Errorf("%w: history time %d (%s) is before time %d", ErrOrder, i,
				d.Times[i].UTC().Format(time.RFC3339), i-1)
		}
	}
	for _, l := range d.Levels {
		if !(l > 0 && l < 100) {
			return fmt.Errorf("%w: %v", ErrLevel, l)
		}
	}
	for i, p := range d.Forecast {
		if len(p.Lower) != len(d.Levels) || len(p.Upper) != len(d.Levels) {
			return fmt.Errorf("%w: forecast point %d has %d lower and %d upper bounds for %d levels",
				ErrShape, i, len(p.Lower), len(p.Upper), len(d.Levels))
		}
		if i > 0 && p.Time.Before(d.Forecast[i-1].Time) {
			return fmt.Errorf("%w: forecast point %d (%s) is before point %d", ErrOrder, i,
				p.Time.UTC().Format(time.RFC3339), i-1)
		}
	}
	return nil
}

// Colours of our own palette.
var (
	colHistory  = color.RGBA{R: 0x2b, G: 0x2b, B: 0x2b, A: 0xff}
	colMedian   = color.RGBA{R: 0x0b, G: 0x4f, B: 0x9c, A: 0xff}
	colBandDark = color.RGBA{R: 0x8f, G: 0xb8, B: 0xe0, A: 0xff} // narrowest band
	colBandPale = color.RGBA{R: 0xd4, G: 0xe4, B: 0xf4, A: 0xff} // widest band
	colFiring   = color.RGBA{R: 0xc6, G: 0x28, B: 0x28, A: 0xff}
	colOK       = color.RGBA{R: 0xd9, G: 0x8c, B: 0x00, A: 0xff}
	colRefit    = color.RGBA{R: 0x7a, G: 0x7a, B: 0x7a, A: 0xff}
	colGrid     = color.RGBA{R: 0xe6, G: 0xe6, B: 0xe6, A: 0xff}
)

// MedianColor is the colour of the median forecast line.
func MedianColor() color.RGBA { return colMedian }

// BandColor returns the fill colour of the band at rank i of n, i = 0
// being the narrowest (lowest level). With two levels the 80 % band is
// colBandDark and the 95 % band colBandPale; the HTTP surface's browser
// test looks for these colours in a screenshot.
func BandColor(i, n int) color.RGBA {
	if n <= 1 {
		return colBandDark
	}
	t := float64(i) / float64(n-1)
	mix := func(a, b uint8) uint8 { return uint8(math.Round(float64(a) + t*(float64(b)-float64(a)))) }
	return color.RGBA{R: mix(colBandDark.R, colBandPale.R), G: mix(colBandDark.G, colBandPale.G),
		B: mix(colBandDark.B, colBandPale.B), A: 0xff}
}

var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

func secs(t time.Time) float64 { return float64(t.UnixNano()) / 1e9 }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// draw1 lays the chart out on c: plot on the left, legend on the right.
func draw1(c draw.Canvas, d *Data, wpx int) {
	compact := wpx < CompactWidth
	c.SetColor(color.White)
	c.Fill(c.Rectangle.Path())

	p := plot.New()
	tick, label := vg.Length(9), vg.Length(10)
	if compact {
		tick = 7
	}
	p.Title.TextStyle.Font = font.From(sans, 12)
	p.X.Tick.Label.Font = font.From(sans, tick)
	p.Y.Tick.Label.Font = font.From(sans, tick)
	p.X.Label.TextStyle.Font = font.From(sans, label)
	p.Y.Label.TextStyle.Font = font.From(sans, label)
	p.X.Padding, p.Y.Padding = 0, 0
	if !compact {
		p.Title.Text = d.Title
		p.X.Label.Text = "time (UTC)"
		p.Title.Padding = 6
	}

	x0, x1, hasX := xRange(d)
	r := yRange(d)
	if !hasX {
		p.Title.Text = strings.TrimSpace(d.Title + " — no data yet")
		x0, x1 = 0, 1
		p.X.Tick.Marker = plot.ConstantTicks(nil)
		p.Y.Tick.Marker = plot.ConstantTicks(nil)
	} else {
		p.X.Tick.Marker = timeTicker{maxLabels: max(2, wpx/120)}
		p.Y.Tick.Marker = valueTicker{}
		if d.Index {
			p.X.Tick.Marker = valueTicker{}
			if !compact {
				p.X.Label.Text = "observation"
			}
		}
	}
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = colGrid, colGrid
	g.Vertical.Width, g.Horizontal.Width = vg.Points(0.5), vg.Points(0.5)
	p.Add(g)

	leg := plot.NewLegend()
	leg.TextStyle.Font = font.From(sans, 9)
	leg.Top, leg.Left = true, true
	leg.ThumbnailWidth = 18
	leg.Padding = 3
	nleg := 0
	legend := func(name string, th ...plot.Thumbnailer) { leg.Add(name, th...); nleg++ }

	// Bands, widest first so narrower ones lie on top.
	order := make([]int, len(d.Levels))
	for i := range order {
		order[i] = i
	}
	slices.SortFunc(order, func(a, b int) int { return -cmpFloat(d.Levels[a], d.Levels[b]) })
	ax, ay, anchored := anchor(d)
	for rank, li := range order {
		poly := bandPolygon(d, li, r, ax, ay, anchored)
		if poly == nil {
			continue
		}
		poly.Color = BandColor(len(order)-1-rank, len(order))
		poly.LineStyle.Width = 0
		p.Add(poly)
	}
	for i := range order { // legend narrowest first
		li := order[len(order)-1-i]
		legend(fmt.Sprintf("%s %% interval", formatLevel(d.Levels[li])),
			&plotter.Polygon{Color: BandColor(i, len(order))})
	}

	// Refit markers.
	refit := draw.LineStyle{Color: colRefit, Width: vg.Points(0.8), Dashes: []vg.Length{vg.Points(2), vg.Points(2)}}
	nref := 0
	for _, t := range d.Refits {
		x := secs(t)
		if x < x0 || x > x1 {
			continue
		}
		l := &plotter.Line{XYs: plotter.XYs{{X: x, Y: r.lo}, {X: x, Y: r.hi}}, LineStyle: refit}
		p.Add(l)
		if nref == 0 {
			legend("refit", l)
		}
		nref++
	}

	// History.
	if len(d.Times) > 0 {
		h := newHistory(d, wpx, x0, x1)
		h.style = draw.LineStyle{Color: colHistory, Width: vg.Points(1)}
		p.Add(h)
		legend("history", &plotter.Line{LineStyle: h.style})
	}

	// Median forecast.
	if n := len(d.Forecast); n > 0 {
		var xy plotter.XYs
		if anchored {
			xy = append(xy, plotter.XY{X: ax, Y: ay})
		}
		for _, pt := range d.Forecast {
			if finite(pt.Median) {
				xy = append(xy, plotter.XY{X: secs(pt.Time), Y: pt.Median})
			}
		}
		med := &plotter.Line{XYs: xy, LineStyle: draw.LineStyle{Color: colMedian, Width: vg.Points(1.4)}}
		p.Add(med)
		legend("median forecast", med)
	}

	// Thresholds.
	for _, th := range d.Thresholds {
		if !finite(th.Value) {
			continue
		}
		col := colOK
		if th.Firing {
			col = colFiring
		}
		st := draw.LineStyle{Color: col, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(5), vg.Points(3)}}
		l := &plotter.Line{XYs: plotter.XYs{{X: x0, Y: th.Value}, {X: x1, Y: th.Value}}, LineStyle: st}
		dir := "above"
		if !th.Above {
			dir = "below"
		}
		name := fmt.Sprintf("%s: %s %s", th.Name, dir, formatExact(th.Value))
		if th.Firing {
			name += ", firing"
		}
		if th.Value < r.lo || th.Value > r.hi {
			name += " (off chart)"
		} else {
			p.Add(l)
		}
		legend(name, l)
	}

	p.X.Min, p.X.Max = x0, x1
	p.Y.Min, p.Y.Max = r.lo, r.hi

	if compact || nleg == 0 {
		p.Draw(c)
		return
	}
	lw := leg.Rectangle(c).Size().X + 12
	if lw > c.Size().X/3 {
		lw = c.Size().X / 3
	}
	p.Draw(draw.Crop(c, 0, -lw, 0, 0))
	top := vg.Length(8)
	if p.Title.Text != "" {
		top += p.Title.TextStyle.Rectangle(p.Title.Text).Size().Y + p.Title.Padding
	}
	leg.Draw(draw.Crop(c, c.Size().X-lw+8, 0, 0, -top))
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

// xRange spans the history and the forecast.
func xRange(d *Data) (x0, x1 float64, ok bool) {
	x0, x1 = math.Inf(1), math.Inf(-1)
	if n := len(d.Times); n > 0 {
		x0, x1 = secs(d.Times[0]), secs(d.Times[n-1])
	}
	if n := len(d.Forecast); n > 0 {
		x0 = math.Min(x0, secs(d.Forecast[0].Time))
		x1 = math.Max(x1, secs(d.Forecast[n-1].Time))
	}
	if x0 > x1 {
		return 0, 0, false
	}
	if x0 == x1 {
		x0, x1 = x0-1800, x1+1800
	}
	return x0, x1, true
}

type valueRange struct{ lo, hi float64 }

// yRange: the history and the median set the core span; bands and
// thresholds may widen it by up to 1.5 core spans on either side.
func yRange(d *Data) valueRange {
	lo, hi := math.Inf(1), math.Inf(-1)
	nonneg := true
	see := func(v float64) {
		if finite(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
			nonneg = nonneg && v >= 0
		}
	}
	for _, v := range d.Values {
		see(v)
	}
	for _, p := range d.Forecast {
		see(p.Median)
	}
	if lo > hi {
		for _, t := range d.Thresholds {
			see(t.Value)
		}
	}
	if lo > hi {
		return valueRange{0, 1}
	}
	span := hi - lo
	if span <= 0 {
		span = math.Max(math.Abs(hi)*0.1, 1)
		lo, hi = lo-span/2, hi+span/2
	}
	capLo, capHi := lo-1.5*span, hi+1.5*span
	widen := func(v float64) {
		if finite(v) {
			lo = math.Min(lo, math.Max(v, capLo))
			hi = math.Max(hi, math.Min(v, capHi))
			nonneg = nonneg && v >= 0
		}
	}
	for _, p := range d.Forecast {
		for i := range p.Lower {
			widen(p.Lower[i])
			widen(p.Upper[i])
		}
	}
	for _, t := range d.Thresholds {
		if finite(t.Value) && t.Value >= capLo && t.Value <= capHi {
			widen(t.Value)
		}
	}
	pad := 0.04 * (hi - lo)
	lo, hi = lo-pad, hi+pad
	if nonneg && lo < 0 {
		lo = 0
	}
	return valueRange{lo, hi}
}

// anchor is the last finite history point when it comes before the first
// forecast point: the median and the bands start from it.
func anchor(d *Data) (x, y float64, ok bool) {
	if len(d.Forecast) == 0 {
		return 0, 0, false
	}
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

// bandPolygon is the closed outline upper(t) forward, lower(t) backward;
// unbounded endpoints run to the edge of the value range.
func bandPolygon(d *Data, li int, r valueRange, ax, ay float64, anchored bool) *plotter.Polygon {
	n := len(d.Forecast)
	if n == 0 {
		return nil
	}
	ring := make(plotter.XYs, 0, 2*n+2)
	if anchored {
		ring = append(ring, plotter.XY{X: ax, Y: ay})
	}
	clamp := func(v, edge float64) float64 {
		if !finite(v) {
			return edge
		}
		return math.Max(r.lo, math.Min(r.hi, v))
	}
	for _, p := range d.Forecast {
		ring = append(ring, plotter.XY{X: secs(p.Time), Y: clamp(p.Upper[li], r.hi)})
	}
	for i := n - 1; i >= 0; i-- {
		p := d.Forecast[i]
		ring = append(ring, plotter.XY{X: secs(p.Time), Y: clamp(p.Lower[li], r.lo)})
	}
	if len(ring) < 3 {
		return nil
	}
	return &plotter.Polygon{XYs: []plotter.XYs{ring}}
}
