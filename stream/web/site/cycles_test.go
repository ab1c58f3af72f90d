package site

import (
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// The series page lists the model's cycles as durations with the terms
// that carry them, the outliers the last refit found (time, type, size,
// t value) and the online check's latest flag; a series without them says
// so. Values: a made-up minute series with a daily and a weekly cycle
// (common practice: the page shows what the view holds).
func TestPageCyclesAndOutliers(t *testing.T) {
	src := fixture(t)
	air := &src.views[2]
	fl := time.Date(1960, 12, 1, 0, 0, 0, 0, time.UTC)
	air.Cycles = []Cycle{{Length: 24 * time.Hour, Terms: "fourier", Pairs: 3}, {Length: 7 * 24 * time.Hour, Terms: "fourier", Pairs: 1},
		{Length: 90*time.Minute + 30*time.Second, Terms: "none"}, {Length: 12 * time.Hour, Terms: "profile"}}
	air.Outliers = []Outlier{{Time: time.Date(1960, 3, 1, 0, 0, 0, 0, time.UTC), Kind: "level shift", Size: 0.1234, Tau: 5.67},
		{Time: time.Date(1960, 7, 1, 0, 0, 0, 0, time.UTC), Kind: "additive outlier", Size: -0.05, Tau: -4.2}}
	air.Flag, air.Flags = Flag{Time: fl, Kind: "outlier", Z: 21.34}, 4
	h := Handler(src, prometheus.NewRegistry(), Info{Subjects: []string{"metrics.>"}, Prefix: "forewarn"})
	body := get(t, h, "/series/air.passengers").Body.String()
	for _, want := range []string{
		`<table id="cycles">`,
		`<tr><td>24h</td><td>3 Fourier pairs (sin/cos of harmonics 1–3)</td></tr>`,
		`<tr><td>7d</td><td>1 Fourier pair (sin/cos of harmonic 1)</td></tr>`,
		`<td>none (not worth any terms at the last refit)</td>`,
		`<tr><td>12h</td><td>profile (the cycle&#39;s shape at the last refit, by the phase of data time)</td></tr>`,
		`<table id="outliers">`,
		`<tr><td>1960-03-01T00:00:00Z</td><td>level shift</td><td class="n" title="0.1234">0.1234</td><td class="n">5.7</td></tr>`,
		`<td>additive outlier</td>`,
		`4 buckets taken as outliers or level shifts; the latest, 1960-12-01T00:00:00Z, as outlier (z = 21.3)`,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("series page lacks %s", want)
		}
	}
	body = get(t, h, "/series/uk.gas").Body.String()
	for _, want := range []string{"No seasonal cycle in the model's settings.", "<h2>Outliers found at the last refit</h2>\n<p class=\"muted\">None.</p>",
		"no bucket taken as an outlier or a level shift"} {
		if !strings.Contains(body, want) {
			t.Errorf("uk.gas page lacks %q", want)
		}
	}
}
