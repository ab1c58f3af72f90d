package chart

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// linear is the sRGB transfer function undone (IEC 61966-2-1:1999 §5.2,
// the form W3C WCAG 2.2 uses in its definition of relative luminance).
func linear(v uint8) float64 {
	c := float64(v) / 255
	if c <= 0.04045 {
		return c / 12.92
	}
	return math.Pow((c+0.055)/1.055, 2.4)
}

// luminance is relative luminance as W3C WCAG 2.x defines it (WCAG 2.2,
// "relative luminance"): L = 0.2126 R + 0.7152 G + 0.0722 B on linear
// sRGB components.
func luminance(c color.RGBA) float64 {
	return 0.2126*linear(c.R) + 0.7152*linear(c.G) + 0.0722*linear(c.B)
}

// contrast is the WCAG 2.x contrast ratio (L1 + 0.05) / (L2 + 0.05), L1 the
// lighter of the two; it runs from 1 to 21.
func contrast(a, b color.RGBA) float64 {
	la, lb := luminance(a), luminance(b)
	if la < lb {
		la, lb = lb, la
	}
	return (la + 0.05) / (lb + 0.05)
}

var white = color.RGBA{R: 0xff, G: 0xff, B: 0xff, A: 0xff}

// The contrast function meets the endpoints WCAG 2.x states (black on
// white is 21:1, equal colours 1:1), and the palette meets the contrast
// WCAG 2.x Success Criterion 1.4.11 (Non-text Contrast) asks of graphical
// objects, 3:1 against adjacent colours: every line against the white
// background, and the median path and the rules' lines against every
// band they cross. The bands themselves step in lightness from the
// narrowest (darkest) to the widest and to the background, so they stay
// apart in greyscale.
func TestPaletteContrast(t *testing.T) {
	black := color.RGBA{A: 0xff}
	if got := contrast(black, white); math.Abs(got-21) > 1e-9 {
		t.Fatalf("contrast(black, white) = %v, want 21 (WCAG 2.x)", got)
	}
	if got := contrast(colMedian, colMedian); got != 1 {
		t.Fatalf("contrast of a colour with itself = %v, want 1", got)
	}
	const nonText = 3 // WCAG 2.x SC 1.4.11
	for name, c := range map[string]color.RGBA{"history": colHistory, "median": colMedian,
		"raised": colRaised, "cleared": colCleared, "text": colText} {
		if got := contrast(c, white); got < nonText {
			t.Errorf("%s #%02X%02X%02X on white: %.2f:1, want at least %v:1", name, c.R, c.G, c.B, got, nonText)
		}
	}
	for n := 1; n <= 6; n++ {
		for i := range n {
			b := BandColor(i, n)
			if got := contrast(colMedian, b); got < nonText {
				t.Errorf("median on band %d of %d: %.2f:1, want at least %v:1", i, n, got, nonText)
			}
			if got := contrast(colRaised, b); got < nonText {
				t.Errorf("raised rule on band %d of %d: %.2f:1, want at least %v:1", i, n, got, nonText)
			}
			if got := contrast(colCleared, b); got < nonText {
				t.Errorf("cleared rule on band %d of %d: %.2f:1, want at least %v:1", i, n, got, nonText)
			}
			// Narrower bands are darker; the widest is darker than white.
			lighter := white
			if i+1 < n {
				lighter = BandColor(i+1, n)
			}
			if luminance(b) >= luminance(lighter) {
				t.Errorf("band %d of %d (L = %.3f) is not darker than the next (L = %.3f)",
					i, n, luminance(b), luminance(lighter))
			}
		}
	}
	// The default two bands are apart by a ratio of at least 1.2 from
	// each other and from white (our margin).
	for i, c := range []color.RGBA{BandColor(0, 2), BandColor(1, 2)} {
		lighter := white
		if i == 0 {
			lighter = BandColor(1, 2)
		}
		if got := contrast(c, lighter); got < 1.2 {
			t.Errorf("band %d of 2 against the next lighter: %.3f:1, want at least 1.2:1", i, got)
		}
	}
	// History and median lie at distinct lightness (our margin 1.5:1).
	if got := contrast(colHistory, colMedian); got < 1.5 {
		t.Errorf("history against median: %.2f:1, want at least 1.5:1", got)
	}
}

// The published colours are taken as their sources give them.
func TestPaletteSources(t *testing.T) {
	for _, c := range []struct {
		name string
		got  color.RGBA
		want uint32
	}{
		{"median = Tol muted purple", colMedian, 0xAA4499},
		{"raised = Tol vibrant red", colRaised, 0xCC3311},
		{"widest band = Tol YlOrBr 3", BandColor(1, 2), 0xFEE391},
		{"narrowest band = Tol YlOrBr 4", BandColor(0, 2), 0xFEC44F},
		{"widest of five = Tol YlOrBr 3", BandColor(4, 5), 0xFEE391},
		{"fan contour = Tol YlOrBr 5", colEdge, 0xFB9A29},
	} {
		if c.got != rgb(c.want) {
			t.Errorf("%s: #%02X%02X%02X, want #%06X (P. Tol, Colour Schemes, SRON/EPS/TN/09-002 issue 3.2, 2021)",
				c.name, c.got.R, c.got.G, c.got.B, c.want)
		}
	}
}

// dichromat simulates full protanopia, deuteranopia and tritanopia on
// linear sRGB with the severity-1.0 matrices of G. M. Machado, M. M.
// Oliveira and L. A. F. Fernandes, "A Physiologically-based Model for
// Simulation of Color Vision Deficiency", IEEE TVCG 15(6), 2009, Table 1.
var dichromats = []struct {
	name string
	m    [3][3]float64
}{
	{"protanopia", [3][3]float64{{0.152286, 1.052583, -0.204868}, {0.114503, 0.786281, 0.099216}, {-0.003882, -0.048116, 1.051998}}},
	{"deuteranopia", [3][3]float64{{0.367322, 0.860646, -0.227968}, {0.280085, 0.672501, 0.047413}, {-0.011820, 0.042940, 0.968881}}},
	{"tritanopia", [3][3]float64{{1.255528, -0.076749, -0.178779}, {-0.078411, 0.930809, 0.147602}, {0.004733, 0.691367, 0.303900}}},
}

// lab is CIE 1976 L*a*b* (D65 white) of linear sRGB rgb, through CIE XYZ
// with the sRGB primaries of IEC 61966-2-1.
func lab(rgb [3]float64) [3]float64 {
	x := 0.4124*rgb[0] + 0.3576*rgb[1] + 0.1805*rgb[2]
	y := 0.2126*rgb[0] + 0.7152*rgb[1] + 0.0722*rgb[2]
	z := 0.0193*rgb[0] + 0.1192*rgb[1] + 0.9505*rgb[2]
	f := func(t float64) float64 {
		if t > 216.0/24389 {
			return math.Cbrt(t)
		}
		return (24389.0/27*t + 16) / 116
	}
	fx, fy, fz := f(x/0.95047), f(y), f(z/1.08883)
	return [3]float64{116*fy - 16, 500 * (fx - fy), 200 * (fy - fz)}
}

// deltaE is the CIE 1976 colour difference ΔE*ab of a and b as seen
// through the 3×3 matrix m (the identity for normal vision).
func deltaE(a, b color.RGBA, m [3][3]float64) float64 {
	see := func(c color.RGBA) [3]float64 {
		in := [3]float64{linear(c.R), linear(c.G), linear(c.B)}
		var out [3]float64
		for i := range 3 {
			for j := range 3 {
				out[i] += m[i][j] * in[j]
			}
			out[i] = math.Max(0, math.Min(1, out[i]))
		}
		return lab(out)
	}
	p, q := see(a), see(b)
	return math.Sqrt((p[0]-q[0])*(p[0]-q[0]) + (p[1]-q[1])*(p[1]-q[1]) + (p[2]-q[2])*(p[2]-q[2]))
}

// The marks that must be told apart stay apart for dichromat viewers: in
// each simulation every pair differs by ΔE*ab ≥ 15, several times the
// just-noticeable difference of about 2.3 (M. Mahy, L. Van Eycken and
// A. Oosterlinck, Color Res. Appl. 19(2), 1994); the margin is ours.
// The Lab conversion is checked at its fixed points first: white is
// L* = 100, a* = b* = 0 and black is L* = 0 (CIE 15:2004).
func TestColourBlindSeparation(t *testing.T) {
	if w := lab([3]float64{1, 1, 1}); math.Abs(w[0]-100) > 0.01 || math.Abs(w[1]) > 0.05 || math.Abs(w[2]) > 0.05 {
		t.Fatalf("Lab of white = %v, want (100, 0, 0)", w)
	}
	if k := lab([3]float64{}); math.Abs(k[0]) > 1e-9 {
		t.Fatalf("Lab of black = %v, want L* = 0", k)
	}
	pairs := []struct {
		a, b string
		x, y color.RGBA
	}{
		{"history", "median", colHistory, colMedian},
		{"median", "raised", colMedian, colRaised},
		{"history", "raised", colHistory, colRaised},
		{"raised", "cleared", colRaised, colCleared},
		{"median", "cleared", colMedian, colCleared},
		{"median", "50 % band", colMedian, BandColor(0, 2)},
		{"raised", "50 % band", colRaised, BandColor(0, 2)},
		{"50 % band", "90 % band", BandColor(0, 2), BandColor(1, 2)},
		{"90 % band", "contour", BandColor(1, 2), colEdge},
	}
	for _, dc := range dichromats {
		for _, p := range pairs {
			if got := deltaE(p.x, p.y, dc.m); got < 15 {
				t.Errorf("%s: %s and %s differ by ΔE*ab %.1f, want at least 15", dc.name, p.a, p.b, got)
			}
		}
	}
}

// grey is what a greyscale rendering makes of c: Go's color.GrayModel
// (luma 0.299 R' + 0.587 G' + 0.114 B' of ITU-R BT.601 on the
// gamma-encoded components).
func grey(c color.Color) uint8 { return color.GrayModel.Convert(c).(color.Gray).Y }

// A rendered series chart, converted to greyscale, keeps the history, the
// median path, the two bands and the background at distinct grey levels:
// the pixels that carry each mark's colour in the colour image are found,
// and their grey levels in the converted image are at least 24 of 255
// apart from one mark to the next (our margin). With FOREWARN_ARTIFACTS
// set, the colour and greyscale images are saved there.
func TestGreyscaleRender(t *testing.T) {
	d := refForecast(t, "AirPassengers_na_log_airline", []float64{50, 90})
	d.Title = "air.passengers"
	d.Thresholds = []Threshold{{Name: "busy-summer", Value: 600, Above: true, Raised: true}}
	img := renderPNG(t, d, Options{Width: 960, Height: 440})
	g := image.NewGray(img.Bounds())
	draw.Draw(g, g.Bounds(), img, image.Point{}, draw.Src)
	if dir := os.Getenv("FOREWARN_ARTIFACTS"); dir != "" {
		for name, im := range map[string]image.Image{"chart-colour.png": img, "chart-grey.png": g} {
			f, err := os.Create(filepath.Join(dir, name))
			if err != nil {
				t.Fatal(err)
			}
			if err := png.Encode(f, im); err != nil {
				t.Fatal(err)
			}
			f.Close()
		}
	}
	marks := []struct {
		name string
		c    color.RGBA
		min  int // pixels of the colour the render must hold
	}{
		{"history", colHistory, 300},
		{"median path", colMedian, 80},
		{"50 % band", BandColor(0, 2), 500},
		{"90 % band", BandColor(1, 2), 500},
		{"background", white, 10000},
	}
	levels := make([]int, len(marks))
	for i, m := range marks {
		n, level := 0, -1
		b := img.Bounds()
		for y := b.Min.Y; y < b.Max.Y; y++ {
			for x := b.Min.X; x < b.Max.X; x++ {
				r, gg, bl, _ := img.At(x, y).RGBA()
				if uint8(r>>8) != m.c.R || uint8(gg>>8) != m.c.G || uint8(bl>>8) != m.c.B {
					continue
				}
				n++
				if l := int(g.GrayAt(x, y).Y); level < 0 {
					level = l
				} else if l != level {
					t.Fatalf("%s: grey levels %d and %d for one colour", m.name, level, l)
				}
			}
		}
		if n < m.min {
			t.Fatalf("%s: %d pixels of #%02X%02X%02X, want at least %d", m.name, n, m.c.R, m.c.G, m.c.B, m.min)
		}
		levels[i] = level
	}
	t.Logf("grey levels: %v", func() string {
		s := ""
		for i, m := range marks {
			s += fmt.Sprintf("%s %d; ", m.name, levels[i])
		}
		return s
	}())
	for i := 1; i < len(marks); i++ {
		if levels[i]-levels[i-1] < 24 {
			t.Errorf("greyscale: %s at %d and %s at %d are less than 24 levels apart",
				marks[i-1].name, levels[i-1], marks[i].name, levels[i])
		}
	}
	if grey(colMedian) != uint8(levels[1]) {
		t.Errorf("GrayModel of the median colour %d, in the render %d", grey(colMedian), levels[1])
	}
}
