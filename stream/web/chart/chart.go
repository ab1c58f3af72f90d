package chart

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

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

	// Levels are the central interval levels in percent, e.g. [50 90];
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
	Name  string
	Value float64
	Above bool // the rule watches for the series going above Value
	// Raised is the rule's alarm state (ITU-T X.733): true while the
	// alert is raised, false while it is cleared.
	Raised bool
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
