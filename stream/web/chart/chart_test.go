package chart

import (
	"bytes"
	"encoding/xml"
	"errors"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// pixels counts, in img, the pixels of colour c (exact match; the fill of
// a band is opaque, so its inner pixels carry the colour exactly) and
// returns their bounding box.
func pixels(img image.Image, c color.RGBA) (n int, box image.Rectangle) {
	b := img.Bounds()
	box = image.Rectangle{Min: b.Max, Max: b.Min}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if uint8(r>>8) == c.R && uint8(g>>8) == c.G && uint8(bl>>8) == c.B {
				n++
				box.Min.X, box.Min.Y = min(box.Min.X, x), min(box.Min.Y, y)
				box.Max.X, box.Max.Y = max(box.Max.X, x+1), max(box.Max.Y, y+1)
			}
		}
	}
	return n, box
}

func renderPNG(t *testing.T, d *Data, o Options) image.Image {
	t.Helper()
	var buf bytes.Buffer
	if err := Render(&buf, PNG, d, o); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

// The forecast fan of the log airline model of AirPassengers with six
// missing months (R 4.2.2 predict.Arima, testdata/r/arima_refs.json) is
// drawn as two bands that lie right of the history, with the narrower
// 50 % band on top of the 90 % band, the median path and the raised
// rule's line across. The chart is compact (no title, no legend), so every
// pixel counted belongs to the plot.
func TestBandsDrawnInForecastRegion(t *testing.T) {
	d := refForecast(t, "AirPassengers_na_log_airline", []float64{50, 90})
	d.Thresholds = []Threshold{{Name: "capacity", Value: 700, Above: true, Raised: true}}
	img := renderPNG(t, d, Options{Width: 470, Height: 300})
	if b := img.Bounds(); b.Dx() != 470 || b.Dy() != 300 {
		t.Fatalf("image is %v, want 470×300 px", b)
	}
	n50, box50 := pixels(img, BandColor(0, 2))
	n90, box90 := pixels(img, BandColor(1, 2))
	if n50 < 300 || n90 < 300 {
		t.Fatalf("band pixels: 50 %% %d, 90 %% %d; want both drawn", n50, n90)
	}
	// The fan starts at the origin rule, right of the history's last
	// drawn pixel (the line's own antialiasing aside).
	nh, boxH := pixels(img, colHistory)
	if nh < 200 {
		t.Fatalf("history: %d pixels of its colour", nh)
	}
	if box50.Min.X < boxH.Max.X-3 || box90.Min.X < boxH.Max.X-3 {
		t.Errorf("band pixels start at x = %d (50 %%) and %d (90 %%), left of the history's end at %d",
			box50.Min.X, box90.Min.X, boxH.Max.X)
	}
	// The 90 % band is taller than the 50 % band.
	if box90.Dy() <= box50.Dy() {
		t.Errorf("90 %% band spans %d px vertically, 50 %% band %d", box90.Dy(), box50.Dy())
	}
	if n, _ := pixels(img, colMedian); n < 50 {
		t.Errorf("median path: %d pixels of its colour", n)
	}
	// The raised rule's line (2 px wide at full size, so whole pixel rows
	// carry its colour) runs across the plot.
	big := renderPNG(t, d, Options{Width: 960, Height: 440})
	if n, box := pixels(big, colRaised); n < 400 || box.Dx() < 600 {
		t.Errorf("raised rule: %d pixels of its colour over %d px", n, box.Dx())
	}
}

// An unbounded upper endpoint (outside the inverse transform's domain)
// runs the band to the top of the plotting area instead of failing.
func TestUnboundedBandReachesEdge(t *testing.T) {
	d := synthetic(300, 3)
	for i := range d.Forecast {
		if i > 20 {
			d.Forecast[i].Upper[1] = math.Inf(1)
			d.Forecast[i].Upper[0] = math.NaN()
		}
	}
	d.Thresholds = nil
	img := renderPNG(t, d, Options{Width: 470, Height: 300})
	_, box := pixels(img, BandColor(0, 2))
	if box.Min.Y > 3 {
		t.Errorf("unbounded 50 %% band tops out at y = %d px, want the top of the plot", box.Min.Y)
	}
}

// The bands are staircases: step h is flat over the half-way points to
// its neighbours, the steps tile the forecast without gaps or overlaps,
// and the first begins half-way between the last history bucket and the
// first forecast time, where the origin rule stands (seeded invented
// data; the layout is our own definition).
func TestFanSteps(t *testing.T) {
	d := synthetic(120, 4)
	f := newFan(d)
	step := 60.0 // one minute
	last := secs(d.Times[len(d.Times)-1])
	if want := last + step/2; f.origin != want {
		t.Fatalf("origin at %v, want %v", f.origin, want)
	}
	for i := range d.Forecast {
		x := secs(d.Forecast[i].Time)
		if f.left[i] != x-step/2 || f.right[i] != x+step/2 {
			t.Errorf("step %d covers [%v, %v], want [%v, %v]", i, f.left[i], f.right[i], x-step/2, x+step/2)
		}
		if i > 0 && f.left[i] != f.right[i-1] {
			t.Errorf("steps %d and %d do not meet", i-1, i)
		}
	}
	if !f.anchored || f.ax != last || f.ay != d.Values[len(d.Values)-1] {
		t.Errorf("median path starts at (%v, %v) anchored %v, want the last history value", f.ax, f.ay, f.anchored)
	}
	r := yRange(d)
	ring := f.band(d, 1, r).XYs[0]
	if len(ring) != 4*len(d.Forecast) {
		t.Fatalf("band outline has %d vertices, want 4 per step", len(ring))
	}
	for i, p := range d.Forecast {
		// Upper edge forward: (left, upper), (right, upper); lower edge
		// backward: (right, lower), (left, lower).
		ul, ur := ring[2*i], ring[2*i+1]
		lr, ll := ring[len(ring)-2-2*i], ring[len(ring)-1-2*i]
		if ul.Y != p.Upper[1] || ur.Y != p.Upper[1] || lr.Y != p.Lower[1] || ll.Y != p.Lower[1] {
			t.Errorf("step %d: outline at %v…%v, want the bounds %v…%v", i, ll.Y, ul.Y, p.Lower[1], p.Upper[1])
		}
		if ul.X != f.left[i] || ur.X != f.right[i] || lr.X != f.right[i] || ll.X != f.left[i] {
			t.Errorf("step %d: outline spans x %v…%v (upper) and %v…%v (lower), want the step %v…%v",
				i, ul.X, ur.X, ll.X, lr.X, f.left[i], f.right[i])
		}
	}
	if x0, x1, _ := xRange(d, f); x0 != secs(d.Times[0]) || x1 != f.right[len(f.right)-1] {
		t.Errorf("time axis %v…%v, want the first history time to the end of the last step", x0, x1)
	}
}

// svgTexts returns the text elements of an SVG document.
func svgTexts(t *testing.T, svg []byte) map[string]bool {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(svg))
	texts := map[string]bool{}
	in := false
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			return texts
		}
		if err != nil {
			t.Fatalf("SVG does not parse as XML: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			in = e.Name.Local == "text"
		case xml.CharData:
			if in {
				texts[string(e)] = true
			}
		case xml.EndElement:
			in = false
		}
	}
}

// The legend names every mark in our own words: "history", "median path"
// with the horizon, "50 % band" and "90 % band", "forecast origin",
// "refit", and each alert rule with its threshold in readable units and
// its ITU-T X.733 state word ("raised", "cleared"). None of the former
// words appears.
func TestLegendWords(t *testing.T) {
	d := refForecast(t, "AirPassengers_na_log_airline", []float64{50, 90})
	d.Title = "air.passengers"
	d.Refits = []time.Time{d.Times[100]}
	d.Thresholds = []Threshold{
		{Name: "busy-summer", Value: 600, Above: true, Raised: true},
		{Name: "quiet", Value: 150, Above: false},
		{Name: "record", Value: 2.5e6, Above: true},
	}
	var buf bytes.Buffer
	if err := Render(&buf, SVG, d, Options{Width: 960, Height: 440}); err != nil {
		t.Fatal(err)
	}
	texts := svgTexts(t, buf.Bytes())
	for _, want := range []string{
		"air.passengers", "history", "median path, next 24 months", "50 % band", "90 % band",
		"forecast origin", "refit", "busy-summer: above 600 (raised)", "quiet: below 150 (cleared)",
		"record: above 2.5 M (cleared, off chart)",
	} {
		if !texts[want] {
			t.Errorf("legend lacks %q", want)
		}
	}
	for text := range texts {
		low := strings.ToLower(text)
		for _, old := range []string{"interval", "firing", "resolved", "median forecast"} {
			if strings.Contains(low, old) {
				t.Errorf("legend entry %q carries the former word %q", text, old)
			}
		}
	}
	svg := buf.String()
	for name, c := range map[string]color.RGBA{"50 % band": BandColor(0, 2), "90 % band": BandColor(1, 2)} {
		if !strings.Contains(svg, "fill:"+colorHex(c)) {
			t.Errorf("no %s filled with %s", name, colorHex(c))
		}
	}
	for name, c := range map[string]color.RGBA{"history": colHistory, "median path": colMedian,
		"raised rule": colRaised, "cleared rule": colCleared, "origin rule": colOrigin} {
		if !strings.Contains(svg, "stroke:"+colorHex(c)) {
			t.Errorf("no %s stroked with %s", name, colorHex(c))
		}
	}

	// A compact chart has no legend; a long rule name is cut to keep the
	// legend to a third of the width.
	buf.Reset()
	if err := Render(&buf, SVG, d, Options{Width: 360, Height: 110}); err != nil {
		t.Fatal(err)
	}
	if texts := svgTexts(t, buf.Bytes()); texts["history"] || texts["air.passengers"] {
		t.Error("a compact chart carries a title or a legend")
	}
	d.Thresholds = []Threshold{{Name: strings.Repeat("overlong-rule-name-", 8), Value: 600, Above: true}}
	buf.Reset()
	if err := Render(&buf, SVG, d, Options{Width: 960, Height: 440}); err != nil {
		t.Fatal(err)
	}
	cut := false
	for text := range svgTexts(t, buf.Bytes()) {
		if strings.HasPrefix(text, "overlong-rule-name-") {
			cut = strings.Contains(text, "…: above 600 (cleared)") && len(text) < 80
		}
	}
	if !cut {
		t.Error("an overlong rule name is not cut short with an ellipsis")
	}
}

func TestSVGIsWellFormed(t *testing.T) {
	d := refForecast(t, "USAccDeaths_airline", []float64{50, 90})
	d.Refits = []time.Time{d.Times[48]}
	var buf bytes.Buffer
	if err := Render(&buf, SVG, d, Options{Width: 640, Height: 300}); err != nil {
		t.Fatal(err)
	}
	dec := xml.NewDecoder(bytes.NewReader(buf.Bytes()))
	var root *xml.StartElement
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG does not parse as XML: %v", err)
		}
		if se, ok := tok.(xml.StartElement); ok && root == nil {
			root = &se
		}
	}
	if root == nil || root.Name.Local != "svg" {
		t.Fatalf("root element %v, want svg", root)
	}
	attr := map[string]string{}
	for _, a := range root.Attr {
		attr[a.Name.Local] = a.Value
	}
	// 640 × 300 px at 0.75 pt per px.
	if attr["width"] != "480pt" || attr["height"] != "225pt" {
		t.Errorf("svg size %s × %s, want 480pt × 225pt", attr["width"], attr["height"])
	}
	if !strings.Contains(buf.String(), "sans-serif") {
		t.Error("no generic font fallback in the SVG")
	}
}

func colorHex(c color.RGBA) string {
	const digits = "0123456789ABCDEF"
	b := []byte{'#', 0, 0, 0, 0, 0, 0}
	for i, v := range []uint8{c.R, c.G, c.B} {
		b[1+2*i], b[2+2*i] = digits[v>>4], digits[v&15]
	}
	return string(b)
}

func TestEmptyAndMissingOnly(t *testing.T) {
	for name, d := range map[string]*Data{
		"zero":        {},
		"all missing": {Times: []time.Time{time.Unix(0, 0), time.Unix(60, 0)}, Values: []float64{math.NaN(), math.NaN()}},
		"one value":   {Times: []time.Time{time.Unix(0, 0)}, Values: []float64{5}},
		"no history":  {Forecast: []Point{{Time: time.Unix(60, 0), Median: 1}}},
	} {
		var buf bytes.Buffer
		if err := Render(&buf, SVG, d, Options{}); err != nil {
			t.Errorf("%s: %v", name, err)
		}
		if !bytes.Contains(buf.Bytes(), []byte("</svg>")) {
			t.Errorf("%s: no complete SVG", name)
		}
	}
}

func TestBadInput(t *testing.T) {
	t0 := time.Unix(0, 0)
	cases := []struct {
		name string
		d    Data
		o    Options
		f    Format
		want error
	}{
		{"lengths", Data{Times: []time.Time{t0}, Values: []float64{1, 2}}, Options{}, SVG, ErrShape},
		{"bounds", Data{Levels: []float64{50}, Forecast: []Point{{Time: t0}}}, Options{}, SVG, ErrShape},
		{"order", Data{Times: []time.Time{t0.Add(time.Minute), t0}, Values: []float64{1, 2}}, Options{}, SVG, ErrOrder},
		{"forecast order", Data{Forecast: []Point{{Time: t0.Add(time.Minute)}, {Time: t0}}}, Options{}, SVG, ErrOrder},
		{"level", Data{Levels: []float64{100}}, Options{}, SVG, ErrLevel},
		{"narrow", Data{}, Options{Width: 10}, SVG, ErrSize},
		{"huge", Data{}, Options{Height: 1 << 20}, PNG, ErrSize},
		{"format", Data{}, Options{}, Format(9), ErrFormat},
	}
	for _, c := range cases {
		err := Render(io.Discard, c.f, &c.d, c.o)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: got %v, want %v", c.name, err, c.want)
		}
	}
	if _, err := FormatOf("chart.jpeg"); !errors.Is(err, ErrFormat) {
		t.Errorf("FormatOf(.jpeg): %v", err)
	}
}

func TestWriteFileByExtension(t *testing.T) {
	d := refForecast(t, "co2_airline", []float64{50, 90})
	dir := t.TempDir()
	for _, name := range []string{"co2.svg", "co2.PNG"} {
		path := filepath.Join(dir, name)
		if err := WriteFile(path, d, Options{}); err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		isPNG := bytes.HasPrefix(b, []byte("\x89PNG\r\n\x1a\n"))
		if isPNG != strings.HasSuffix(name, ".PNG") {
			t.Errorf("%s: PNG signature %v", name, isPNG)
		}
	}
}

// Thinning keeps, in every pixel column, the extremes of the original
// values and the gaps (checked on invented data with gaps).
func TestDecimateKeepsExtremesAndGaps(t *testing.T) {
	d := synthetic(20000, 11)
	gaps := 0
	for i := 5000; i < 20000; i += 3001 {
		d.Values[i], d.Values[i+1] = math.NaN(), math.NaN()
		gaps++
	}
	x := make([]float64, len(d.Times))
	for i, tm := range d.Times {
		x[i] = secs(tm)
	}
	const cols = 300
	x0, x1 := x[0], x[len(x)-1]
	dx, dy := decimate(x, d.Values, cols, x0, x1)
	nan := 0
	for _, v := range dy {
		if math.IsNaN(v) {
			nan++
		}
	}
	if nan != gaps {
		t.Errorf("%d gaps survive, want %d", nan, gaps)
	}
	if len(dx) > 2*(cols+1+gaps)+gaps {
		t.Errorf("%d points after thinning to %d columns", len(dx), cols)
	}
	w := (x1 - x0) / cols
	type mm struct{ lo, hi float64 }
	ext := func(xs, ys []float64) map[int]mm {
		m := map[int]mm{}
		for i := range xs {
			if math.IsNaN(ys[i]) {
				continue
			}
			c := int(math.Floor((xs[i] - x0) / w))
			e, ok := m[c]
			if !ok {
				e = mm{ys[i], ys[i]}
			}
			e.lo, e.hi = math.Min(e.lo, ys[i]), math.Max(e.hi, ys[i])
			m[c] = e
		}
		return m
	}
	orig, thin := ext(x, d.Values), ext(dx, dy)
	if len(orig) != len(thin) {
		t.Fatalf("%d columns before, %d after", len(orig), len(thin))
	}
	for c, e := range orig {
		if thin[c] != e {
			t.Errorf("column %d: extremes %v, want %v", c, thin[c], e)
		}
	}
	for i := 1; i < len(dx); i++ {
		if dx[i] < dx[i-1] {
			t.Fatalf("thinned times go backwards at %d", i)
		}
	}
}

func TestTimeTicks(t *testing.T) {
	at := func(s string) float64 {
		tm, err := time.Parse(time.RFC3339, s)
		if err != nil {
			t.Fatal(err)
		}
		return secs(tm)
	}
	cases := []struct {
		lo, hi string
		n      int
		want   []string
	}{
		{"2025-03-04T00:10:00Z", "2025-03-06T00:00:00Z", 7,
			[]string{"Mar 4 12:00", "Mar 5 00:00", "12:00", "Mar 6 00:00"}},
		{"2025-03-04T09:58:00Z", "2025-03-04T11:01:00Z", 5,
			[]string{"Mar 4 10:00", "10:15", "10:30", "10:45", "11:00"}},
		{"2024-12-20T00:00:00Z", "2025-01-20T00:00:00Z", 5,
			[]string{"Dec 23 2024", "Dec 30", "Jan 6 2025", "Jan 13", "Jan 20"}}, // weeks start on Monday
		{"1949-01-01T00:00:00Z", "1951-01-01T00:00:00Z", 5,
			[]string{"Jan 1949", "Jul", "Jan 1950", "Jul", "Jan 1951"}},
		{"1949-01-01T00:00:00Z", "1962-12-01T00:00:00Z", 7,
			[]string{"1950", "1952", "1954", "1956", "1958", "1960", "1962"}},
		{"1700-01-01T00:00:00Z", "1988-01-01T00:00:00Z", 7,
			[]string{"1700", "1750", "1800", "1850", "1900", "1950"}},
	}
	for _, c := range cases {
		ticks := timeTicker{maxLabels: c.n}.Ticks(at(c.lo), at(c.hi))
		var got []string
		for _, tk := range ticks {
			got = append(got, tk.Label)
		}
		if strings.Join(got, "|") != strings.Join(c.want, "|") {
			t.Errorf("%s … %s: %q, want %q", c.lo, c.hi, got, c.want)
		}
	}
}

func TestFormatValue(t *testing.T) {
	cases := []struct {
		v, step, mag float64
		want         string
	}{
		{9e11, 1e11, 9e11, "900 G"},
		{9.03e11, 1e9, 9.5e11, "903 G"},
		{1.93e6, 1e4, 2e6, "1.93 M"},
		{1834.5, 0.5, 2000, "1834.5"},
		{0.25, 0.05, 1, "0.25"},
		{12000, 2000, 20000, "12 k"},
		{-5e6, 1e6, 5e6, "-5 M"},
		{2.5e6, 5e5, 5e6, "2.5 M"},
		{0, 1, 10, "0"},
		{0.00012, 0.00002, 0.0002, "0.00012"},
	}
	for _, c := range cases {
		if got := formatValue(c.v, c.step, c.mag); got != c.want {
			t.Errorf("formatValue(%g, %g, %g) = %q, want %q", c.v, c.step, c.mag, got, c.want)
		}
	}
	if got := formatExact(9.0e11); got != "900 G" {
		t.Errorf("formatExact(9e11) = %q", got)
	}
	if got := formatExact(1191.6251); got != "1191.63" {
		t.Errorf("formatExact(1191.6251) = %q", got)
	}
}

// Tick labels stay distinct when the ticks fall on halves (a range of
// 1.5 … 3.5 with a unit step between labels).
func TestValueTicksDistinct(t *testing.T) {
	for _, r := range [][2]float64{{1.4, 3.6}, {0.001, 0.0042}, {99990, 100012}, {-2.5e9, 7.5e9}} {
		seen := map[string]bool{}
		for _, tk := range (valueTicker{}).Ticks(r[0], r[1]) {
			if tk.Label == "" {
				continue
			}
			if seen[tk.Label] {
				t.Errorf("range %v: label %q twice", r, tk.Label)
			}
			seen[tk.Label] = true
		}
		if len(seen) < 2 {
			t.Errorf("range %v: %d labels", r, len(seen))
		}
	}
}

// An offline fit's CSV time column as R writes time(x) (decimal years) is
// read as months, and the forecast continues month by month; without a
// time column the axis counts observations.
func TestOfflineData(t *testing.T) {
	r := refForecast(t, "USAccDeaths_airline", []float64{50, 90})
	o := &Offline{Title: "USAccDeaths", Values: r.Values, Levels: r.Levels}
	for i := range r.Times {
		// R's time(USAccDeaths): 1973, 1973.0833…, as in the dataset file.
		o.Times = append(o.Times, strconv.FormatFloat(1973+float64(i)/12, 'f', 8, 64))
	}
	for _, p := range r.Forecast {
		o.Median, o.Lower, o.Upper = append(o.Median, p.Median), append(o.Lower, p.Lower), append(o.Upper, p.Upper)
	}
	d, err := o.Data()
	if err != nil {
		t.Fatal(err)
	}
	if d.Index {
		t.Fatal("decimal years not read as times")
	}
	// USAccDeaths runs Jan 1973 – Dec 1978 (R `datasets`); the first
	// forecast month is Jan 1979.
	if got := d.Times[len(d.Times)-1]; !got.Equal(time.Date(1978, 12, 1, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("last time %v", got)
	}
	if got := d.Forecast[0].Time; !got.Equal(time.Date(1979, 1, 1, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("first forecast time %v", got)
	}
	if got := d.Forecast[23].Time; !got.Equal(time.Date(1980, 12, 1, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("24th forecast time %v", got)
	}
	if err := Render(io.Discard, SVG, d, Options{}); err != nil {
		t.Fatal(err)
	}

	o.Times = nil
	d, err = o.Data()
	if err != nil || !d.Index || d.Forecast[0].Time.Unix() != int64(len(o.Values)+1) {
		t.Fatalf("index axis: %v %v", err, d)
	}
	var buf bytes.Buffer
	if err := Render(&buf, SVG, d, Options{}); err != nil || !strings.Contains(buf.String(), ">observation<") {
		t.Errorf("index axis not labelled: %v", err)
	}
	o.Lower = o.Lower[:3]
	if _, err := o.Data(); !errors.Is(err, ErrShape) {
		t.Errorf("short bounds: %v", err)
	}
	for _, c := range []struct {
		col  []string
		want time.Time
	}{
		{[]string{"2025-03-04T10:00:00Z", "2025-03-04T10:05:00Z"}, time.Date(2025, 3, 4, 10, 10, 0, 0, time.UTC)},
		{[]string{"2025-03-04", "2025-03-05"}, time.Date(2025, 3, 6, 0, 0, 0, 0, time.UTC)},
		{[]string{"1741082400", "1741082460"}, time.Unix(1741082520, 0)},
		{[]string{"1960.00", "1960.25", "1960.50"}, time.Date(1960, 10, 1, 0, 0, 0, 0, time.UTC)}, // quarterly
		// Dates on the first of the month step by calendar months (31,
		// 28, 31 days apart here), quarters too.
		{[]string{"1973-01-01", "1973-02-01", "1973-03-01"}, time.Date(1973, 4, 1, 0, 0, 0, 0, time.UTC)},
		{[]string{"1960-01-01", "1960-04-01", "1960-07-01"}, time.Date(1960, 10, 1, 0, 0, 0, 0, time.UTC)},
		// Mid-month dates are not a month grid: the median gap, 31 days.
		{[]string{"1973-01-15", "1973-02-15", "1973-03-15", "1973-04-15"}, time.Date(1973, 5, 16, 0, 0, 0, 0, time.UTC)},
	} {
		tl, ok := parseTimes(c.col)
		if !ok || !tl.after(1).Equal(c.want) {
			t.Errorf("%v: next %v (ok %v), want %v", c.col, tl.after(1), ok, c.want)
		}
	}
	if _, ok := parseTimes([]string{"1", "x"}); ok {
		t.Error("a non-time cell accepted")
	}
}

// Durations are written as a person writes them; every form without a
// day unit reads back through Go's time.ParseDuration to the same
// duration, and one with a day unit does after "d" is taken as 24h (the
// unit forewarn's config accepts beside Go's).
func TestFormatDuration(t *testing.T) {
	cases := []struct {
		d    time.Duration
		want string
	}{
		{12 * time.Hour, "12h"},
		{6*time.Hour + 30*time.Minute, "6h30m"},
		{45 * time.Minute, "45m"},
		{90 * time.Second, "1m30s"},
		{24 * time.Hour, "24h"},
		{36 * time.Hour, "36h"},
		{48 * time.Hour, "2d"},
		{60 * time.Hour, "60h"},
		{84 * time.Hour, "3d12h"},
		{744 * time.Hour, "31d"},
		{-2 * time.Hour, "-2h"},
	}
	for _, c := range cases {
		got := formatDuration(c.d)
		if got != c.want {
			t.Errorf("formatDuration(%v) = %q, want %q", c.d, got, c.want)
			continue
		}
		s := got
		var days time.Duration
		if i := strings.Index(s, "d"); i >= 0 {
			n, err := strconv.Atoi(s[:i])
			if err != nil {
				t.Fatalf("%q: %v", got, err)
			}
			days, s = time.Duration(n)*24*time.Hour, s[i+1:]
		}
		back := time.Duration(0)
		if s != "" {
			var err error
			if back, err = time.ParseDuration(s); err != nil {
				t.Fatalf("%q does not parse: %v", got, err)
			}
		}
		if days+back != c.d {
			t.Errorf("%q reads back as %v, want %v", got, days+back, c.d)
		}
	}
}

// The median path's legend names the horizon: the span from the last
// history bucket to the last forecast step, in calendar months on a month
// grid, as a duration otherwise, in steps on an observation axis.
func TestHorizon(t *testing.T) {
	air := refForecast(t, "AirPassengers_na_log_airline", []float64{50, 90}) // 24 months after Dec 1960
	mins := synthetic(100, 2)                                                // 60 one-minute steps
	idx := &Data{Index: true, Times: []time.Time{time.Unix(1, 0)}, Values: []float64{1},
		Forecast: []Point{{Time: time.Unix(2, 0)}, {Time: time.Unix(3, 0)}}}
	q := &Data{Times: []time.Time{time.Date(1960, 10, 1, 0, 0, 0, 0, time.UTC)}, Values: []float64{1}}
	for h := 1; h <= 12; h++ {
		q.Forecast = append(q.Forecast, Point{Time: time.Date(1960, time.Month(10+3*h), 1, 0, 0, 0, 0, time.UTC)})
	}
	for _, c := range []struct {
		d    *Data
		want string
	}{
		{air, "median path, next 24 months"},
		{mins, "median path, next 1h"},
		{idx, "median path, next 2 steps"},
		{q, "median path, next 3 years"},
		{&Data{Forecast: []Point{{Time: time.Unix(60, 0)}}}, "median path"},
	} {
		if got := medianLabel(c.d, newFan(c.d)); got != c.want {
			t.Errorf("%q, want %q", got, c.want)
		}
	}
}
