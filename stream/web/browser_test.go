package web

import (
	"bytes"
	"context"
	"image"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"forewarn/stream/web/chart"
)

// chromium returns the path of Debian's headless-capable Chromium. It
// skips the test when there is none, except in CI (CI=true), where the
// browser test must run.
func chromium(t *testing.T) string {
	t.Helper()
	for _, p := range []string{"/usr/bin/chromium", "chromium", "chromium-browser"} {
		if path, err := exec.LookPath(p); err == nil {
			return path
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("chromium not found; CI installs Debian's chromium for the browser test")
	}
	t.Skip("chromium not installed (apt-get install -y chromium)")
	return ""
}

// artifacts is where screenshots go: $FOREWARN_ARTIFACTS if set, else a
// temporary directory of the test.
func artifacts(t *testing.T) string {
	if dir := os.Getenv("FOREWARN_ARTIFACTS"); dir != "" {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		return dir
	}
	return t.TempDir()
}

// browse runs headless Chromium on url with the extra flags and returns
// its standard output.
func browse(t *testing.T, bin, url string, flags ...string) []byte {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	args := append([]string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
		"--disable-component-update", "--disable-sync", "--no-first-run", "--hide-scrollbars",
		"--force-color-profile=srgb", "--user-data-dir=" + t.TempDir()}, flags...)
	cmd := exec.CommandContext(ctx, bin, append(args, url)...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("chromium %s: %v\n%s", url, err, errb.String())
	}
	return out.Bytes()
}

// screenshot saves a PNG of url at 1200×900 under dir/name and decodes it.
func screenshot(t *testing.T, bin, url, dir, name string) image.Image {
	t.Helper()
	path := filepath.Join(dir, name)
	browse(t, bin, url, "--screenshot="+path, "--window-size=1200,900")
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("screenshot %s: %v", path, err)
	}
	t.Logf("screenshot: %s", path)
	return img
}

// near counts the pixels within 2 levels per channel of c (the inside of
// a filled band is one flat colour; the margin absorbs rounding in the
// browser's compositing).
func near(img image.Image, c color.RGBA) int {
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if absDiff(uint8(r>>8), c.R) <= 2 && absDiff(uint8(g>>8), c.G) <= 2 && absDiff(uint8(bl>>8), c.B) <= 2 {
				n++
			}
		}
	}
	return n
}

func absDiff(a, b uint8) uint8 {
	if a > b {
		return a - b
	}
	return b - a
}

// The index and a series page, served from a running daemon fed with R
// datasets, load in real headless Chromium: the DOM lists every series
// and links its chart, and the screenshots show the median forecast and
// both interval bands in their colours.
func TestBrowserRendersChartsAndBands(t *testing.T) {
	bin := chromium(t)
	l := startLive(t)
	dir := artifacts(t)
	band80, band95 := chart.BandColor(0, 2), chart.BandColor(1, 2)

	dom := string(browse(t, bin, l.srv.URL+"/", "--dump-dom"))
	for _, topic := range []string{"air.passengers", "uk.gas", "lab.hormone"} {
		if !strings.Contains(dom, `data-topic="`+topic+`"`) {
			t.Errorf("index DOM has no row for %s", topic)
		}
		if !strings.Contains(dom, `src="api/series/`+topic+`/chart.svg?w=360&amp;h=110"`) {
			t.Errorf("index DOM has no chart for %s", topic)
		}
	}
	if !strings.Contains(dom, "warming up") || !strings.Contains(dom, "fitted") && !strings.Contains(dom, "refitting") {
		t.Error("index DOM lacks the status words")
	}

	idx := screenshot(t, bin, l.srv.URL+"/", dir, "index.png")
	// Two fitted series, each with a small fan: both bands must show.
	if n80, n95 := near(idx, band80), near(idx, band95); n80 < 100 || n95 < 100 {
		t.Errorf("index screenshot: %d pixels of the 80 %% band colour, %d of the 95 %%; want both bands drawn", n80, n95)
	}

	page := l.srv.URL + "/series/air.passengers"
	dom = string(browse(t, bin, page, "--dump-dom"))
	if !strings.Contains(dom, `id="chart"`) || !strings.Contains(dom, `chart.svg?w=960&amp;h=440`) {
		t.Error("series page DOM has no chart")
	}
	if i := strings.Index(dom, `<table id="forecast">`); i < 0 {
		t.Error("series page has no forecast table")
	} else if n := strings.Count(dom[i:i+strings.Index(dom[i:], "</table>")], "<tr>"); n != 25 {
		t.Errorf("forecast table has %d rows, want 24 steps and a header", n)
	}
	big := screenshot(t, bin, page, dir, "series-air.passengers.png")
	n80, n95 := near(big, band80), near(big, band95)
	if n80 < 1000 || n95 < 500 {
		t.Errorf("series screenshot: %d pixels of the 80 %% band colour, %d of the 95 %%", n80, n95)
	}
	if n := near(big, chart.MedianColor()); n < 100 {
		t.Errorf("series screenshot: %d pixels of the median line", n)
	}
}
