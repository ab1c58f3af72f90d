package site

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"io"
	"net/http"
	"net/http/httptest"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus"

	"forewarn/stream/humanfmt"
)

func get(t *testing.T, h http.Handler, url string, header ...string) *httptest.ResponseRecorder {
	t.Helper()
	req := httptest.NewRequest("GET", url, nil)
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	return rec
}

func TestHealthAndReadiness(t *testing.T) {
	src := fixture(t)
	h := Handler(src, prometheus.NewRegistry(), Info{Subjects: []string{"metrics.>"}, Prefix: "forewarn"})
	if rec := get(t, h, "/healthz"); rec.Code != 200 {
		t.Errorf("/healthz: %d", rec.Code)
	}
	if rec := get(t, h, "/readyz"); rec.Code != http.StatusServiceUnavailable {
		t.Errorf("/readyz before ready: %d", rec.Code)
	}
	close(src.ready)
	if rec := get(t, h, "/readyz"); rec.Code != 200 {
		t.Errorf("/readyz after ready: %d", rec.Code)
	}
	src.down = true
	if rec := get(t, h, "/api/series"); rec.Code != http.StatusServiceUnavailable {
		t.Errorf("/api/series with the daemon down: %d", rec.Code)
	}
}

func TestSeriesJSON(t *testing.T) {
	h := Handler(fixture(t), prometheus.NewRegistry(), Info{Subjects: []string{"metrics.>"}, Prefix: "forewarn"})
	rec := get(t, h, "/api/series")
	if rec.Code != 200 || rec.Header().Get("Content-Type") != "application/json" {
		t.Fatalf("/api/series: %d %s", rec.Code, rec.Header().Get("Content-Type"))
	}
	var list []Summary
	if err := json.Unmarshal(rec.Body.Bytes(), &list); err != nil {
		t.Fatal(err)
	}
	var topics []string
	for _, s := range list {
		topics = append(topics, s.Topic)
	}
	if strings.Join(topics, ",") != "air.passengers,lab.hormone,uk.gas" {
		t.Errorf("topics %v, want sorted", topics)
	}
	air := list[0]
	// The last AirPassengers value in R's `datasets` is 432 (Dec 1960).
	if air.LastValue == nil || *air.LastValue != 432 || air.Rejects != 3 || air.Late != 1 || air.Status != "fitted" {
		t.Errorf("air.passengers summary %+v", air)
	}
	// Alert states are ITU-T X.733's alarm states (CONTRACT.md §2).
	if len(air.Alerts) != 2 || air.Alerts[0].State != "raised" || air.Alerts[1].State != "cleared" || air.Alerts[1].Probability != nil {
		t.Errorf("alerts %+v", air.Alerts)
	}
	// Realised coverage per level, as on the series page (issue 13): a
	// level with nothing resolved yet is null; a series that does not
	// calibrate has none.
	if c := air.Coverage; len(c) != 2 || c[0].Level != 80 || c[0].Realised == nil || *c[0].Realised != 0.7843 ||
		c[0].Weight != 1234.4 || c[1].Level != 95 || c[1].Realised != nil {
		t.Errorf("air.passengers coverage %+v", c)
	}
	if list[1].Coverage != nil {
		t.Errorf("lab.hormone does not calibrate, coverage %+v", list[1].Coverage)
	}
	if list[1].Model != "" || list[1].Status != "warming_up" || !list[1].Origin.IsZero() {
		t.Errorf("warming series %+v", list[1])
	}

	if rec := get(t, h, "/api/series/air.passengers"); rec.Code != 200 || rec.Body.String() != `{"topic":"air.passengers"}` {
		t.Errorf("latest: %d %q", rec.Code, rec.Body.String())
	}
	rec = get(t, h, "/api/series/uk.gas")
	var e map[string]string
	if rec.Code != 404 || json.Unmarshal(rec.Body.Bytes(), &e) != nil || e["error"] == "" {
		t.Errorf("no forecast yet: %d %q", rec.Code, rec.Body.String())
	}
}

func TestChartEndpoint(t *testing.T) {
	h := Handler(fixture(t), prometheus.NewRegistry(), Info{Subjects: []string{"metrics.>"}, Prefix: "forewarn"})
	rec := get(t, h, "/api/series/air.passengers/chart.svg?w=500&h=200&points=60")
	if rec.Code != 200 || rec.Header().Get("Content-Type") != "image/svg+xml" {
		t.Fatalf("chart: %d %s %s", rec.Code, rec.Header().Get("Content-Type"), rec.Body.String())
	}
	dec := xml.NewDecoder(bytes.NewReader(rec.Body.Bytes()))
	for {
		_, err := dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("chart is not well-formed XML: %v", err)
		}
	}
	if !strings.Contains(rec.Body.String(), `width="375pt" height="150pt"`) {
		t.Error("chart size not taken from w and h")
	}
	for url, want := range map[string]int{
		"/api/series/air.passengers/chart.svg?w=abc":    400,
		"/api/series/air.passengers/chart.svg?h=99999":  400,
		"/api/series/air.passengers/chart.svg?points=0": 400,
		"/api/series/no.such/chart.svg":                 404,
		"/api/series/lab.hormone/chart.svg":             200,
		"/series/no.such":                               404,
	} {
		rec := get(t, h, url)
		if rec.Code != want {
			t.Errorf("%s: %d, want %d (%s)", url, rec.Code, want, rec.Body.String())
		}
		if want == 400 && !strings.Contains(rec.Body.String(), "query parameter") {
			t.Errorf("%s: message %q does not name the parameter", url, rec.Body.String())
		}
	}
}

func TestPages(t *testing.T) {
	h := Handler(fixture(t), prometheus.NewRegistry(), Info{Subjects: []string{"metrics.>"}, Prefix: "forewarn"})
	rec := get(t, h, "/")
	if rec.Code != 200 || !strings.HasPrefix(rec.Header().Get("Content-Type"), "text/html") {
		t.Fatalf("index: %d", rec.Code)
	}
	body := rec.Body.String()
	for _, want := range []string{
		`<a href="series/air.passengers">air.passengers</a>`,
		`src="api/series/air.passengers/chart.svg?w=360&amp;h=110"`,
		`<span class="st st-warming_up">warming up</span>`,
		`<div class="raised">busy-summer: raised</div>`, // ITU-T X.733 alarm states
		`<div class="cleared">quiet: cleared</div>`,
		`<span class="muted">gauge, step 10m</span>`, // lh: 10-minute samples (R's datasets::lh)
		`<td class="n" title="432">432</td>`,         // AirPassengers, Dec 1960 (R's datasets)
		`<td class="n" title="782.8">782.8</td>`,     // UKgas, 1986 Q4 (R's datasets)
		`3 <span class="muted">(1 late)</span>`,
		`Reading <code>metrics.&gt;</code>; publishing under <code>forewarn.</code>`,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("index lacks %s", want)
		}
	}
	if n := strings.Count(body, `<tr class="series"`); n != 3 {
		t.Errorf("index lists %d series, want 3", n)
	}

	rec = get(t, h, "/series/air.passengers")
	if rec.Code != 200 {
		t.Fatalf("series page: %d", rec.Code)
	}
	body = rec.Body.String()
	// 24 forecast rows (R's predict with n.ahead = 24), the header row
	// names both levels.
	tbl := body[strings.Index(body, `<table id="forecast">`):]
	tbl = tbl[:strings.Index(tbl, "</table>")]
	if n := strings.Count(tbl, "<tr>"); n != 25 {
		t.Errorf("forecast table has %d rows, want 24 and a header", n)
	}
	for _, want := range []string{"80 % interval", "95 % interval", `src="../api/series/air.passengers/chart.svg?w=960&amp;h=440"`,
		`<td title="600">above 600</td>`, `<td class="raised">raised</td>`, `<td class="cleared">cleared</td>`, "97.0 %",
		// The first forecast month of AirPassengers is January 1961, 31 days
		// after the origin, December 1960 (the Gregorian calendar).
		`<td class="n">&#43;31d</td><td class="muted">1961-01-01T00:00:00Z</td>`} { // html/template writes + as &#43;
		if !strings.Contains(body, want) {
			t.Errorf("series page lacks %q", want)
		}
	}
	checkCells(t, tbl, fixture(t).views[2].Forecast)
	for _, bad := range []string{"firing", "resolved", `"ok"`, "e+"} {
		if strings.Contains(body, bad) {
			t.Errorf("series page has %q", bad)
		}
	}
	// Band coverage next to the nominal level (common practice: a
	// percentage with one decimal, as the alert probabilities).
	cov := body[strings.Index(body, `<table id="coverage">`):]
	cov = cov[:strings.Index(cov, "</table>")]
	for _, want := range []string{
		`<tr><td>80 % interval</td><td class="n">80 %</td><td class="n">78.4 %</td><td class="n">1234</td></tr>`,
		`<tr><td>95 % interval</td><td class="n">95 %</td><td class="n">—</td><td class="n">0</td></tr>`,
	} {
		if !strings.Contains(cov, want) {
			t.Errorf("coverage table lacks %s:\n%s", want, cov)
		}
	}
	body = get(t, h, "/series/uk.gas").Body.String()
	if want := `<td title="1250">above 1.25 k</td>`; !strings.Contains(body, want) {
		t.Errorf("uk.gas page lacks %s", want)
	}
	if !strings.Contains(body, "The bands are the model's own") || strings.Contains(body, `<table id="coverage">`) {
		t.Error("uk.gas page, not calibrated, does not say its bands are the model's own")
	}
	rec = get(t, h, "/series/lab.hormone")
	if !strings.Contains(rec.Body.String(), "No forecast yet") {
		t.Error("warming series page does not say there is no forecast")
	}
}

// cellRe is a forecast table cell with a value: the full value in the
// title, the short one as text.
var cellRe = regexp.MustCompile(`<td class="n" title="([^"]*)">([^<]*)</td>`)

// checkCells reads the forecast table row by row: each mean and median
// cell carries the R reference value with every digit in its title and
// humanfmt's short form as its text; each band cell both bounds.
func checkCells(t *testing.T, tbl string, f *Forecast) {
	t.Helper()
	rows := strings.Split(tbl, "<tr>")[2:] // before the first, and the header
	if len(rows) != len(f.Points) {
		t.Fatalf("%d forecast rows, want %d", len(rows), len(f.Points))
	}
	for i, row := range rows {
		p := f.Points[i]
		cells := cellRe.FindAllStringSubmatch(row, -1)
		if len(cells) != 2+len(f.Levels) {
			t.Errorf("row %d: %d value cells, want mean, median and %d bands: %s", p.H, len(cells), len(f.Levels), row)
			continue
		}
		for j, x := range []float64{p.Mean, p.Median} {
			full, err := strconv.ParseFloat(cells[j][1], 64)
			if err != nil || full != x {
				t.Errorf("row %d cell %d: title %q, want the full value %v", p.H, j, cells[j][1], x)
			}
			if cells[j][2] != humanfmt.Value(x) {
				t.Errorf("row %d cell %d: %q, want %q", p.H, j, cells[j][2], humanfmt.Value(x))
			}
		}
		for k := range f.Levels {
			c := cells[2+k]
			want := humanfmt.Value(p.Lower[k]) + " … " + humanfmt.Value(p.Upper[k])
			if c[2] != want || c[1] != strconv.FormatFloat(p.Lower[k], 'f', -1, 64)+" … "+strconv.FormatFloat(p.Upper[k], 'f', -1, 64) {
				t.Errorf("row %d band %d: %q title %q, want %q with the full bounds", p.H, k, c[2], c[1], want)
			}
		}
	}
}
